//! No new function over 80 lines and no new file over 600 lines in `crates/*/src` without a
//! reason in a comment: `scripts/code-shape --check` (the list of the older ones still to
//! split is `scripts/code-shape.known`).

use std::path::Path;
use std::process::Command;

#[test]
fn no_function_or_file_grows_long_without_a_reason() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("../..");
    let output = Command::new("python3")
        .arg(root.join("scripts/code-shape"))
        .arg("--check")
        .output()
        .expect("python3 runs scripts/code-shape (the test suite needs Python 3)");
    assert!(
        output.status.success(),
        "{}{}",
        String::from_utf8_lossy(&output.stdout),
        String::from_utf8_lossy(&output.stderr)
    );
}
