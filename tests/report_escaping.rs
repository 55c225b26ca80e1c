//! A release title holding markup and `&` (tests/fixtures/hostile) reaches
//! the HTML report as text: escaped, never as a tag. (The headless-browser
//! check in tests/report_browser.sh also opens the page and sees no script
//! run.)

mod common;

#[test]
fn release_titles_are_escaped_in_the_report() {
    let dir = tempfile::tempdir().unwrap();
    let fx = common::root().join("tests/fixtures/hostile");
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_eventfence"))
        .args([
            "analyze",
            "--quiet",
            "--placebo",
            "0",
            "--bootstrap",
            "0",
            "--trades",
        ])
        .arg(fx.join("trades.csv"))
        .arg("--calendar")
        .arg(fx.join("calendar.csv"))
        .arg("--out")
        .arg(dir.path())
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let html = std::fs::read_to_string(dir.path().join("report.html")).unwrap();
    assert!(
        !html.contains("<script") && !html.contains("<img"),
        "markup from the calendar reached the page"
    );
    assert!(html.contains("&lt;script&gt;console.log(&quot;ran&quot;)&lt;/script&gt; &amp; &lt;img src=x onerror=console.log(1)&gt; Jobs"));
    // The title is also in releases.csv, unchanged (CSV quoting only).
    let csv = std::fs::read_to_string(dir.path().join("releases.csv")).unwrap();
    assert!(csv.contains("\"<script>console.log(\"\"ran\"\")</script> & <img src=x onerror=console.log(1)> Jobs\""), "{csv}");
}
