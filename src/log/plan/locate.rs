//! Where a key of a plan is written: the 1-based line of `rod[1].position_m`,
//! `dipole_test.mount[0].label` or `limits.coverage_min` in the plan's text, so that a
//! value refused after parsing is named by file, line and key, as a syntax error is.
//! Tables written as `[[rod]]` headers and inline (`rod = [{ … }]`) are both found.

use toml_edit::{ImDocument, Item, TableLike, Value};

/// The line of `key` (dotted, with `[i]` for an element of an array of tables) in
/// `text`, or `None` when the key is not written there (a default, or a key the text
/// does not hold).
pub(super) fn line_of(text: &str, key: &str) -> Option<usize> {
    let doc = ImDocument::parse(text).ok()?;
    let mut table: &dyn TableLike = doc.as_table();
    let mut span = None;
    let mut segments = key.split('.').peekable();
    while let Some(segment) = segments.next() {
        let (name, index) = split_index(segment)?;
        let Some((k, item)) = table.get_key_value(name) else {
            break; // not written: the line of the innermost table that is
        };
        span = k.span().or_else(|| item.span()).or(span);
        let last = segments.peek().is_none();
        let next: Option<&dyn TableLike> = match (item, index) {
            (Item::ArrayOfTables(a), Some(i)) => {
                let t = a.get(i)?;
                span = t.span().or(span);
                Some(t)
            }
            (Item::Value(Value::Array(a)), Some(i)) => {
                let v = a.get(i)?;
                span = v.span().or(span);
                v.as_inline_table().map(|t| t as &dyn TableLike)
            }
            (_, Some(_)) => return None,
            (item, None) => item.as_table_like(),
        };
        if last {
            break;
        }
        table = next?;
    }
    let start = span?.start.min(text.len());
    Some(text[..start].matches('\n').count() + 1)
}

/// `mount[2]` → (`mount`, Some(2)); `label` → (`label`, None).
fn split_index(segment: &str) -> Option<(&str, Option<usize>)> {
    match segment.strip_suffix(']').and_then(|s| s.split_once('[')) {
        Some((name, i)) => Some((name, Some(i.parse().ok()?))),
        None => Some((segment, None)),
    }
}

#[cfg(test)]
mod tests {
    use super::line_of;

    const PLAN: &str = "# a plan\n[article]\nserial = \"A\"\nbuild = \"1\"\n\n[[rod]]\nname = \"x\"\n\n[[rod]]\nname = \"y\"\nposition_m = [0, 0, nan]\n\n[dipole_test]\nmount = [\n  { label = \"up\" },\n  { label = \"side\" },\n]\n\n[limits]\ncoverage_min = inf\n";

    #[test]
    fn keys_are_found_on_their_lines() {
        assert_eq!(line_of(PLAN, "article.serial"), Some(3));
        assert_eq!(line_of(PLAN, "rod[1].position_m"), Some(11));
        assert_eq!(line_of(PLAN, "rod[0].name"), Some(7));
        assert_eq!(line_of(PLAN, "dipole_test.mount[1].label"), Some(16));
        assert_eq!(line_of(PLAN, "limits.coverage_min"), Some(20));
        // A key not written: the innermost table that is.
        assert_eq!(line_of(PLAN, "rod[0].settle_s"), Some(6));
        assert_eq!(line_of(PLAN, "site.lat_deg"), None);
        assert_eq!(line_of(PLAN, "rod[7].name"), None);
    }
}
