//! The README's first design of one's own: the design file it shows parses,
//! generates a table that meets every window a tick wide, and the table is
//! the one the README names (layout and bytes) at the pair count it gives.

use host_tool::model::design::Design;

fn readme() -> String {
    let path = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("../README.md");
    std::fs::read_to_string(path).unwrap()
}

/// The first ```toml block of `text`, its indentation removed.
fn toml_block(text: &str) -> String {
    let start = text.find("```toml\n").expect("a toml block") + "```toml\n".len();
    let len = text[start..].find("```").unwrap();
    text[start..start + len]
        .lines()
        .map(|l| l.strip_prefix("   ").unwrap_or(l))
        .collect::<Vec<_>>()
        .join("\n")
}

/// The number in `text` just before `marker` (digits, commas and a decimal
/// point allowed), e.g. "100" in "a 100-byte".
fn number_before(text: &str, marker: &str) -> f64 {
    let at = text
        .find(marker)
        .unwrap_or_else(|| panic!("README says {marker:?}"));
    let head = &text[..at];
    let digits: String = head
        .chars()
        .rev()
        .take_while(|c| c.is_ascii_digit() || *c == '.' || *c == ',')
        .collect::<Vec<_>>()
        .into_iter()
        .rev()
        .filter(|&c| c != ',')
        .collect();
    digits.parse().unwrap()
}

#[test]
fn the_readmes_first_design_gets_the_table_it_names() {
    let text = readme();
    let design = Design::parse(&toml_block(&text), "pump_logic.toml").unwrap();
    let out = host_tool::generate::generate(&design).unwrap();
    let (table, v) = (&out.table, &out.verification);
    let claim = format!("-byte `{}` table", table.layout_name());
    let bytes = number_before(&text, &claim);
    println!(
        "{}: {} layout, {} bytes, {} pairs, {} outside a window a tick wide",
        design.name,
        table.layout_name(),
        table.table_bytes(),
        v.points_checked,
        v.outside_window_wide
    );
    assert_eq!(bytes, table.table_bytes() as f64, "README's size");
    let millions = number_before(&text, " million) and prints the counts");
    assert!(
        (millions - v.points_checked as f64 / 1e6).abs() < 0.05,
        "README's pair count"
    );
    assert_eq!(v.points_checked, v.pairs_in_range);
    assert_eq!(v.outside_window_wide, 0, "every window a tick wide is met");
    assert!(v.max_error_ticks <= design.max_error_ticks);
}
