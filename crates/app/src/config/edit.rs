//! Changing one value of a configuration file while keeping its comments and
//! layout (the dashboard's threshold and hold edits).

use toml_edit::{DocumentMut, Item, value};

/// Sets `key = "new"` in the `[[table]]` entry whose `id` is `id`, keeping
/// everything else of the text as it was. `table` is `alarm` or `gate`.
pub fn set_value(
    text: &str,
    table: &str,
    id: &str,
    key: &str,
    new: &str,
) -> Result<String, String> {
    let mut doc: DocumentMut = text
        .parse()
        .map_err(|e| format!("the config no longer parses: {e}"))?;
    let entries = doc
        .get_mut(table)
        .and_then(Item::as_array_of_tables_mut)
        .ok_or_else(|| format!("the config has no [[{table}]] entries"))?;
    let entry = entries
        .iter_mut()
        .find(|t| t.get("id").and_then(Item::as_str) == Some(id))
        .ok_or_else(|| format!("the config has no [[{table}]] with id = \"{id}\""))?;
    match entry.get_mut(key) {
        // Keep the value's own comment and spacing.
        Some(item) if item.is_value() => {
            let decor = item.as_value().map(|v| v.decor().clone());
            *item = value(new);
            if let (Some(d), Some(v)) = (decor, item.as_value_mut()) {
                *v.decor_mut() = d;
            }
        }
        _ => {
            entry.insert(key, value(new));
        }
    }
    Ok(doc.to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn changes_one_value_and_keeps_comments() {
        let text = "# top comment\n[[alarm]]\nid = \"a\"\nabove = \"1 mbar\"   # trip here\n\n[[alarm]]\nid = \"b\"\nabove = \"2 mbar\"\n\n[[gate]]\nid = \"g\"\nhold = \"120 s\"\n";
        let out = set_value(text, "alarm", "b", "above", "3e-5 mbar").expect("edit");
        assert_eq!(
            out,
            text.replace("above = \"2 mbar\"", "above = \"3e-5 mbar\"")
        );
        let out = set_value(text, "alarm", "a", "above", "5 mbar").expect("edit");
        assert!(out.contains("above = \"5 mbar\"   # trip here"), "{out}");
        let out = set_value(text, "gate", "g", "hold", "60 s").expect("edit");
        assert!(out.contains("hold = \"60 s\""));
        assert!(out.starts_with("# top comment\n"));
        assert!(set_value(text, "alarm", "zz", "above", "1 mbar").is_err());
        assert!(set_value("x = [", "alarm", "a", "above", "1").is_err());
    }
}
