//! One link of the sign chain: what a check found for one element (magnetometer, gyro,
//! rod, law) on one body axis, and how the checks' own verdict words map onto it
//! (docs/sign-chain.md).

use serde::Serialize;

/// What is known about one element of the chain on one body axis.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Element {
    /// Proven: the sign (and axis) is what the plan says.
    Ok,
    /// A sensor axis reads the plan's axis reversed (align).
    Flipped,
    /// A sensor axis is another axis than the plan's (align).
    Swapped,
    /// A rod pushes the other way (polarity), or the law commands the other way (loop).
    Reversed,
    /// A rod answers another rod's command (polarity `wrong-axis`, loop `cross-wired`).
    CrossWired,
    /// A rod gives no measurable response (polarity `no-response`) or the software never
    /// drives it although the law asks for it (loop `not-driven`).
    NotDriven,
    /// A test was made and could not tell: not a proof.
    Inconclusive,
    /// No step of the closeout tests it.
    Unchecked,
}

impl Element {
    /// The word in the JSON.
    pub fn word(self) -> &'static str {
        match self {
            Element::Ok => "ok",
            Element::Flipped => "flipped",
            Element::Swapped => "swapped",
            Element::Reversed => "reversed",
            Element::CrossWired => "cross-wired",
            Element::NotDriven => "not-driven",
            Element::Inconclusive => "inconclusive",
            Element::Unchecked => "unchecked",
        }
    }

    /// The words shown to people in tables.
    pub fn label(self) -> &'static str {
        match self {
            Element::Ok => "ok",
            Element::Flipped => "FLIPPED",
            Element::Swapped => "SWAPPED axis",
            Element::Reversed => "REVERSED",
            Element::CrossWired => "CROSS-WIRED",
            Element::NotDriven => "NOT DRIVEN",
            Element::Inconclusive => "cannot tell",
            Element::Unchecked => "not tested",
        }
    }

    /// A wrong sign or axis was found: the chain is broken here.
    pub fn is_broken(self) -> bool {
        !matches!(
            self,
            Element::Ok | Element::Inconclusive | Element::Unchecked
        )
    }

    /// Order for combining several findings on one element: ok < unchecked <
    /// inconclusive < broken.
    fn rank(self) -> u8 {
        match self {
            Element::Ok => 0,
            Element::Unchecked => 1,
            Element::Inconclusive => 2,
            _ => 3,
        }
    }

    /// The worse of two findings (the first broken one found stays).
    pub fn worst(self, other: Element) -> Element {
        if other.rank() > self.rank() {
            other
        } else {
            self
        }
    }

    /// An align axis verdict (`axes[].verdict`, magnetometer or gyro); `None` for a
    /// word align does not use.
    pub fn from_align(word: &str) -> Option<Element> {
        match word {
            "ok" => Some(Element::Ok),
            "flipped" => Some(Element::Flipped),
            "swapped" => Some(Element::Swapped),
            "inconclusive" => Some(Element::Inconclusive),
            _ => None,
        }
    }

    /// A polarity rod verdict (`rods[].verdict`). `off-axis` (the response agrees in
    /// sign but lies farther from the expected direction than the model allows:
    /// something in the chain is not as the plan says) is not taken as a proof of the
    /// rod's sign: `inconclusive`.
    pub fn from_polarity(word: &str) -> Option<Element> {
        match word {
            "ok" => Some(Element::Ok),
            "reversed" => Some(Element::Reversed),
            "wrong-axis" => Some(Element::CrossWired),
            "no-response" => Some(Element::NotDriven),
            "inconclusive" | "off-axis" => Some(Element::Inconclusive),
            _ => None,
        }
    }

    /// A loop rod verdict (`rods[].verdict`). A rod the law never commands (`unused`,
    /// spin intent) proves nothing about the law's sign on its axis: `unchecked`.
    pub fn from_loop(word: &str) -> Option<Element> {
        match word {
            "consistent" => Some(Element::Ok),
            "reversed" => Some(Element::Reversed),
            "cross-wired" => Some(Element::CrossWired),
            "not-driven" => Some(Element::NotDriven),
            "unused" => Some(Element::Unchecked),
            "inconclusive" => Some(Element::Inconclusive),
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_broken_finding_wins_and_the_first_broken_one_stays() {
        assert_eq!(Element::Ok.worst(Element::Unchecked), Element::Unchecked);
        assert_eq!(
            Element::Unchecked.worst(Element::Inconclusive),
            Element::Inconclusive
        );
        assert_eq!(
            Element::Inconclusive.worst(Element::Reversed),
            Element::Reversed
        );
        assert_eq!(
            Element::Reversed.worst(Element::CrossWired),
            Element::Reversed
        );
        assert_eq!(Element::Reversed.worst(Element::Ok), Element::Reversed);
    }

    #[test]
    fn every_check_word_of_the_contract_maps_and_unknown_words_do_not() {
        // Words from docs/alignment.md, docs/polarity.md and the loop contract.
        for w in ["ok", "flipped", "swapped", "inconclusive"] {
            assert!(Element::from_align(w).is_some(), "{w}");
        }
        for w in [
            "ok",
            "reversed",
            "wrong-axis",
            "no-response",
            "inconclusive",
            "off-axis",
        ] {
            assert!(Element::from_polarity(w).is_some(), "{w}");
        }
        for w in [
            "consistent",
            "reversed",
            "not-driven",
            "cross-wired",
            "unused",
        ] {
            assert!(Element::from_loop(w).is_some(), "{w}");
        }
        assert_eq!(
            Element::from_polarity("off-axis"),
            Some(Element::Inconclusive)
        );
        assert_eq!(Element::from_loop("unused"), Some(Element::Unchecked));
        assert_eq!(Element::from_align("mirrored"), None);
        assert_eq!(Element::from_loop("ok"), None);
    }
}
