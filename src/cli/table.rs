//! Plain aligned tables for people; machines use --json.

/// Print rows of (name, value, note) aligned in columns.
pub fn print_rows(title: &str, rows: &[(String, String, String)]) {
    println!("{title}");
    let w0 = rows.iter().map(|r| r.0.chars().count()).max().unwrap_or(0);
    let w1 = rows.iter().map(|r| r.1.chars().count()).max().unwrap_or(0);
    for (a, b, c) in rows {
        let pad0 = w0 - a.chars().count();
        let pad1 = w1 - b.chars().count();
        println!("  {a}{}  {}{b}  {c}", " ".repeat(pad0), " ".repeat(pad1));
    }
}

/// A row helper.
pub fn row(name: &str, value: String, note: &str) -> (String, String, String) {
    (name.to_string(), value, note.to_string())
}
