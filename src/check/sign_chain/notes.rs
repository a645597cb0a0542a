//! The sign chain's notes (docs/sign-chain.md): cancelling pairs, polarity read through
//! a wrong magnetometer, and a gyro judged on a hand tumble.

use super::{AxisChain, Element};

/// The note on a gyro judged against the magnetometer (hand tumble) in step `index`.
pub(super) fn tumble_gyro_note(index: usize, found: &[Element; 3], mag_proven: bool) -> String {
    let mut note = format!(
        "Step {index}: align judged the gyro on a hand tumble, against the magnetometer's \
         planned mapping rather than the body."
    );
    if mag_proven {
        note.push_str(" The magnetometer is proven on every axis, so the gyro's axes stand.");
    } else {
        note.push_str(
            " The magnetometer is not proven on every axis in this closeout (a turntable \
             align proves it), so the gyro's \"ok\" axes are counted as inconclusive.",
        );
    }
    if found.iter().any(|e| e.is_broken()) {
        note.push_str(
            " A gyro axis that disagrees may be the gyro's error or the magnetometer's \
             mapping (one flipped magnetometer axis shows as two flipped gyro axes): check \
             both mappings.",
        );
    }
    note
}

/// Notes where they apply: cancelling pairs, and polarity read through a wrong
/// magnetometer.
pub(super) fn explanations(axes: &[AxisChain], polarity_ran: bool) -> Vec<String> {
    let mut out: Vec<String> = axes.iter().filter_map(cancelling_pair).collect();
    let wrong_sensor = axes
        .iter()
        .any(|a| matches!(a.magnetometer, Element::Flipped | Element::Swapped));
    if wrong_sensor && polarity_ran {
        out.push(
            "Polarity judges each rod through the magnetometer's readings and the plan's \
             mapping: with a magnetometer axis flipped or swapped, its rod verdicts are \
             not independent of that error. Fix the mapping and run polarity again."
                .to_string(),
        );
    }
    out
}

/// The note on an axis where exactly two of its signs are wrong (a flipped magnetometer
/// axis, a reversed rod, a reversed law's command): in a B-dot law, m ∝ −Ḃ, each sign
/// multiplies the dipole actually produced, so two wrong ones give the right dipole.
fn cancelling_pair(a: &AxisChain) -> Option<String> {
    let wrong: Vec<&str> = [
        (
            a.magnetometer == Element::Flipped,
            "the magnetometer axis is flipped",
        ),
        (a.rod == Element::Reversed, "the rod is reversed"),
        (a.law == Element::Reversed, "the law is reversed"),
    ]
    .into_iter()
    .filter(|(w, _)| *w)
    .map(|(_, what)| what)
    .collect();
    let [first, second] = wrong[..] else {
        return None;
    };
    Some(format!(
        "Body {}: {first} and {second}. In a B-dot law (m ∝ −Ḃ) the two signs cancel, so \
         the vehicle would detumble on a table and look right; each element is still \
         wrong on its own (attitude from the magnetometer, another law, or a later fix \
         to one of the two breaks it), which is why each needs its own proof.",
        a.axis
    ))
}
