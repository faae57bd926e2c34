//! `regionkey review-page`: the page is opened in a real browser (headless
//! Chromium through its WebDriver, chromium-driver), names are settled with
//! the keyboard and the mouse, the decisions CSV is saved through the page's
//! own button, and `match --decisions` takes it back.
//!
//! The data is the demo's (invented figures, real geography). The decisions
//! made here are the ones the demo's analyst wrote by hand in
//! `input/decisions.csv`, so the matched table from the page's file must be
//! the same bytes as the demo's own `matched.csv`.
//!
//! Without /usr/bin/chromium and /usr/bin/chromedriver the browser test says
//! loudly that it was SKIPPED and passes; `.ci/run` installs both.
//! With `REGIONKEY_SCREENSHOTS=DIR` the screenshots (1280x800 and 390x844)
//! are written into DIR (docs/screenshots/ holds the committed ones).

use std::io::{Read, Write};
use std::net::TcpStream;
use std::path::{Path, PathBuf};
use std::process::{Child, Command as Process, Stdio};
use std::time::{Duration, Instant};

use serde_json::{json, Value};

mod common;
use common::regionkey;

const CHROMIUM: &str = "/usr/bin/chromium";
const CHROMEDRIVER: &str = "/usr/bin/chromedriver";
const ELEMENT: &str = "element-6066-11e4-a52e-4f735466cecf";

/// The demo's outputs in a fresh folder.
fn demo() -> (tempfile::TempDir, PathBuf) {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("demo");
    regionkey()
        .args(["-q", "demo", "--out"])
        .arg(&out)
        .assert()
        .success();
    (dir, out)
}

fn page(demo: &Path, html: &Path) {
    regionkey()
        .args(["review-page"])
        .arg(demo.join("review-first-pass.csv"))
        .arg("--matched")
        .arg(demo.join("matched-first-pass.csv"))
        .args(["--state-column", "state", "--output"])
        .arg(html)
        .assert()
        .success();
}

#[test]
fn the_page_is_self_contained_and_lists_every_name_of_the_review_file() {
    let (_d, demo) = demo();
    let html = demo.join("review.html");
    page(&demo, &html);
    let text = std::fs::read_to_string(&html).unwrap();
    // No network: nothing is fetched from elsewhere.
    for needle in ["src=\"http", "href=\"http", "@import", "url(http", "<link "] {
        assert!(!text.contains(needle), "the page refers to {needle}");
    }
    assert!(text.contains("default-src 'none'"));
    let review = std::fs::read_to_string(demo.join("review-first-pass.csv")).unwrap();
    let mut r = csv::Reader::from_reader(review.as_bytes());
    for row in r.records() {
        let row = row.unwrap();
        let name = serde_json::to_string(&row[0]).unwrap();
        assert!(text.contains(&format!("\"name\":{name}")), "{name} missing");
    }
    // Candidates carry their history and the Virginia map is embedded once.
    assert!(text.contains("Virginia, 2023 counties"));
}

#[test]
fn a_page_of_a_review_file_with_years_keeps_them_in_the_decisions() {
    let dir = tempfile::tempdir().unwrap();
    let review = dir.path().join("review.csv");
    std::fs::write(
        &review,
        "name,state,years,status,rows,reason,candidate_1_code,candidate_1_name,candidate_1_score,chosen_code\n\
         Hartford,CT,2000-2021,review,22,several units,09003,Hartford County,1.000,\n\
         Hartford,CT,2022-2023,review,2,divided,09110,Capitol Planning Region,1.000,09110\n",
    )
    .unwrap();
    let html = dir.path().join("p.html");
    regionkey()
        .args(["review-page"])
        .arg(&review)
        .arg("--output")
        .arg(&html)
        .assert()
        .success();
    let text = std::fs::read_to_string(&html).unwrap();
    assert!(text.contains("\"has_years\":true"));
    assert!(text.contains("\"years_cell\":\"2000-2021\""));
    assert!(text.contains("\"chosen\":\"09110\""));
    // Hartford County's history says it was replaced in 2022.
    assert!(
        text.contains("Hartford County (09003) replaced"),
        "history of 09003"
    );
}

// ---- A small WebDriver client over HTTP on 127.0.0.1 ----

struct Driver {
    port: u16,
    child: Child,
}

impl Drop for Driver {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

fn http(port: u16, method: &str, path: &str, body: Option<&Value>) -> Value {
    let body = body.map(|b| b.to_string()).unwrap_or_default();
    let mut s = TcpStream::connect(("127.0.0.1", port)).unwrap();
    s.set_read_timeout(Some(Duration::from_secs(60))).unwrap();
    write!(
        s,
        "{method} {path} HTTP/1.1\r\nHost: 127.0.0.1:{port}\r\nConnection: close\r\nContent-Type: application/json\r\nContent-Length: {}\r\n\r\n{body}",
        body.len()
    )
    .unwrap();
    // Read the head, then as many bytes as Content-Length says (the driver
    // may keep the connection open).
    let mut raw = Vec::new();
    let mut buf = [0u8; 65536];
    let (head_end, length) = loop {
        let n = s.read(&mut buf).unwrap();
        if n == 0 {
            break (raw.len(), None);
        }
        raw.extend_from_slice(&buf[..n]);
        if let Some(p) = raw.windows(4).position(|w| w == b"\r\n\r\n") {
            let head = String::from_utf8_lossy(&raw[..p]).to_lowercase();
            let length = head
                .lines()
                .find_map(|l| l.strip_prefix("content-length:"))
                .and_then(|v| v.trim().parse::<usize>().ok());
            break (p + 4, length);
        }
    };
    while length.is_some_and(|l| raw.len() < head_end + l) {
        let n = s.read(&mut buf).unwrap();
        if n == 0 {
            break;
        }
        raw.extend_from_slice(&buf[..n]);
    }
    serde_json::from_slice(&raw[head_end.min(raw.len())..]).unwrap_or(Value::Null)
}

struct Session<'a> {
    driver: &'a Driver,
    id: String,
}

impl Drop for Session<'_> {
    /// Closes the browser even when a check failed (stopping the driver
    /// alone would leave the browser running).
    fn drop(&mut self) {
        if let Ok(mut s) = TcpStream::connect(("127.0.0.1", self.driver.port)) {
            let _ = s.set_read_timeout(Some(Duration::from_secs(10)));
            let _ = write!(
                s,
                "DELETE /session/{} HTTP/1.1\r\nHost: 127.0.0.1:{}\r\nConnection: close\r\nContent-Length: 0\r\n\r\n",
                self.id, self.driver.port
            );
            let mut sink = [0u8; 4096];
            let _ = s.read(&mut sink);
        }
    }
}

impl Session<'_> {
    fn call(&self, method: &str, what: &str, body: Value) -> Value {
        let path = format!("/session/{}{what}", self.id);
        let v = http(self.driver.port, method, &path, Some(&body));
        if let Some(err) = v["value"].get("error") {
            panic!("WebDriver {what}: {err} {}", v["value"]["message"]);
        }
        v["value"].clone()
    }
    fn script(&self, script: &str) -> Value {
        self.call(
            "POST",
            "/execute/sync",
            json!({"script": script, "args": []}),
        )
    }
    fn find(&self, css: &str) -> String {
        let v = self.call(
            "POST",
            "/element",
            json!({"using": "css selector", "value": css}),
        );
        v[ELEMENT].as_str().unwrap().to_string()
    }
    fn click(&self, css: &str) {
        let e = self.find(css);
        // As a person would: scroll it to the middle, clear of the sticky header.
        self.call(
            "POST",
            "/execute/sync",
            json!({"script": "arguments[0].scrollIntoView({block: 'center'})", "args": [{ ELEMENT: e }]}),
        );
        self.call("POST", &format!("/element/{e}/click"), json!({}));
    }
    fn type_into(&self, css: &str, text: &str) {
        let e = self.find(css);
        self.call(
            "POST",
            &format!("/element/{e}/value"),
            json!({ "text": text }),
        );
    }
    fn clear(&self, css: &str) {
        let e = self.find(css);
        self.call("POST", &format!("/element/{e}/clear"), json!({}));
    }
    /// Presses keys on whatever has the focus (the page itself).
    fn keys(&self, keys: &str) {
        let mut actions = Vec::new();
        for k in keys.chars() {
            actions.push(json!({"type": "keyDown", "value": k.to_string()}));
            actions.push(json!({"type": "keyUp", "value": k.to_string()}));
        }
        self.call(
            "POST",
            "/actions",
            json!({"actions": [{"type": "key", "id": "keyboard", "actions": actions}]}),
        );
    }
    fn text(&self, css: &str) -> String {
        let e = self.find(css);
        self.call("GET", &format!("/element/{e}/text"), json!({}))
            .as_str()
            .unwrap_or("")
            .to_string()
    }
    fn current(&self) -> String {
        self.script("return document.querySelector('article.current h2').textContent")
            .as_str()
            .unwrap()
            .to_string()
    }
    fn screenshot(&self, width: u32, height: u32, path: &Path) {
        self.call(
            "POST",
            "/window/rect",
            json!({"width": width, "height": height}),
        );
        std::thread::sleep(Duration::from_millis(300));
        let b64 = self.call("GET", "/screenshot", json!({}));
        let png = base64_decode(b64.as_str().unwrap());
        assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n", "a PNG screenshot");
        std::fs::write(path, png).unwrap();
    }
}

fn base64_decode(text: &str) -> Vec<u8> {
    let value = |c: u8| -> Option<u32> {
        Some(match c {
            b'A'..=b'Z' => c - b'A',
            b'a'..=b'z' => c - b'a' + 26,
            b'0'..=b'9' => c - b'0' + 52,
            b'+' => 62,
            b'/' => 63,
            _ => return None,
        } as u32)
    };
    let digits: Vec<u32> = text.bytes().filter_map(value).collect();
    let mut out = Vec::with_capacity(digits.len() * 3 / 4);
    for chunk in digits.chunks(4) {
        let mut n = 0u32;
        for (i, d) in chunk.iter().enumerate() {
            n |= d << (18 - 6 * i);
        }
        let bytes = [(n >> 16) as u8, (n >> 8) as u8, n as u8];
        out.extend_from_slice(&bytes[..chunk.len().saturating_sub(1)]);
    }
    out
}

fn start_driver() -> Option<Driver> {
    if !Path::new(CHROMIUM).exists() || !Path::new(CHROMEDRIVER).exists() {
        return None;
    }
    let port = std::net::TcpListener::bind("127.0.0.1:0")
        .unwrap()
        .local_addr()
        .unwrap()
        .port();
    let child = Process::new(CHROMEDRIVER)
        .arg(format!("--port={port}"))
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .ok()?;
    let driver = Driver { port, child };
    let t0 = Instant::now();
    while t0.elapsed() < Duration::from_secs(20) {
        if TcpStream::connect(("127.0.0.1", port)).is_ok()
            && http(port, "GET", "/status", None)["value"]["ready"] == json!(true)
        {
            return Some(driver);
        }
        std::thread::sleep(Duration::from_millis(100));
    }
    panic!("chromedriver did not start on port {port}");
}

#[test]
fn a_person_settles_the_review_in_the_browser_and_match_takes_the_file_back() {
    let Some(driver) = start_driver() else {
        eprintln!(
            "\n\n**************************************************************\n\
             SKIPPED: the review page browser test needs {CHROMIUM} and\n\
             {CHROMEDRIVER} (apt-get install chromium chromium-driver).\n\
             **************************************************************\n"
        );
        return;
    };
    let (dir, demo) = demo();
    let html = demo.join("review.html");
    page(&demo, &html);
    let downloads = dir.path().join("downloads");
    let profile = dir.path().join("profile");
    std::fs::create_dir_all(&downloads).unwrap();
    let caps = json!({"capabilities": {"alwaysMatch": {
    "browserName": "chrome",
    "goog:chromeOptions": {
        "binary": CHROMIUM,
        "args": ["--headless=new", "--no-sandbox", "--disable-gpu",
                 "--disable-background-networking", "--disable-component-update",
                 "--disable-sync", "--no-first-run", "--disable-dev-shm-usage",
                 "--window-size=1280,800",
                 format!("--user-data-dir={}", profile.display())],
        "prefs": {"download.default_directory": downloads.display().to_string(),
                  "download.prompt_for_download": false}
    }}}});
    let created = http(driver.port, "POST", "/session", Some(&caps));
    let id = created["value"]["sessionId"]
        .as_str()
        .unwrap_or_else(|| panic!("no session: {created}"))
        .to_string();
    let s = Session {
        driver: &driver,
        id,
    };
    let url = format!("file://{}", html.display());
    s.call("POST", "/url", json!({ "url": url }));

    // The cards as the page orders them (most rows first) and their candidates.
    let cards = s.script(
        "var d = JSON.parse(document.getElementById('page-data').textContent);\
         return d.cards.map(function (c) { return [c.name, c.rows, c.candidates.map(function (x) { return x.code; })]; });",
    );
    let cards = cards.as_array().unwrap().clone();
    let names: Vec<String> = cards
        .iter()
        .map(|c| c[0].as_str().unwrap().to_string())
        .collect();
    let rows: Vec<u64> = cards.iter().map(|c| c[1].as_u64().unwrap()).collect();
    assert_eq!(names.len(), 5, "{names:?}");
    assert!(
        rows.windows(2).all(|w| w[0] >= w[1]),
        "most rows first: {rows:?}"
    );
    let index = |n: &str| names.iter().position(|x| x == n).unwrap();
    assert!(s.text("#count").starts_with("5 of 5 names left"));
    assert_eq!(s.current(), names[0]);

    // Keyboard: move with j/k to a card, pick with 1-5 or n.
    let go_to = |target: usize| {
        let here = index(&s.current());
        let keys = if target >= here {
            "j".repeat(target - here)
        } else {
            "k".repeat(here - target)
        };
        s.keys(&keys);
        assert_eq!(s.current(), names[target]);
    };
    let richmond = index("Richmond, VA");
    go_to(richmond);
    let city = cards[richmond][2]
        .as_array()
        .unwrap()
        .iter()
        .position(|c| c == "51760")
        .unwrap();
    s.keys(&(city + 1).to_string());
    go_to(index("Chicago"));
    s.keys("n");
    go_to(index("Unknown"));
    s.keys("n");

    // Mouse: the "none" button of Statewide.
    let statewide = index("Statewide");
    s.click(&format!("article[data-index=\"{statewide}\"] button.none"));

    // A typed code is checked as it is typed; a wrong one cannot be used.
    let baltimore = index("Baltimore, MD");
    let input = format!("article[data-index=\"{baltimore}\"] input.code");
    s.click(&input);
    s.type_into(&input, "99999");
    assert!(s
        .text(&format!("article[data-index=\"{baltimore}\"] .check"))
        .contains("99999 is not a code"),);
    assert_eq!(
        s.script(&format!(
            "return document.querySelector('article[data-index=\"{baltimore}\"] button.use').disabled"
        )),
        json!(true)
    );
    s.clear(&input);
    s.type_into(&input, "24005\u{E007}"); // Enter
    assert!(s.text("#count").starts_with("0 of 5 names left"));

    // The filter narrows the cards.
    s.click("#filter");
    s.type_into("#filter", "balt");
    let shown = s.script("return document.querySelectorAll('article.card:not([hidden])').length");
    assert_eq!(shown, json!(1));
    s.clear("#filter");
    s.type_into("#filter", " ");
    s.clear("#filter");

    // A reload loses nothing: the decisions are in local storage.
    s.call("POST", "/refresh", json!({}));
    assert!(s.text("#count").starts_with("0 of 5 names left"));
    let richmond_decision = s.text(&format!("article[data-index=\"{richmond}\"] .decision"));
    assert!(richmond_decision.contains("51760"), "{richmond_decision}");

    let shots = std::env::var_os("REGIONKEY_SCREENSHOTS")
        .map(PathBuf::from)
        .unwrap_or_else(|| dir.path().to_path_buf());
    std::fs::create_dir_all(&shots).unwrap();
    s.script("window.scrollTo(0, 0)");
    s.screenshot(1280, 800, &shots.join("review-page-1280x800.png"));
    s.screenshot(390, 844, &shots.join("review-page-390x844.png"));
    // Readable on a narrow screen: no card, button, field or map reaches
    // past the right edge of the window.
    let outside = s.script(
        "return Array.from(document.querySelectorAll('header *, article.card, article.card button, \
         article.card input, figure.map svg')).filter(function (e) { \
         return e.getClientRects().length && e.getBoundingClientRect().right > window.innerWidth + 1; \
         }).map(function (e) { return e.tagName + '.' + e.className; })",
    );
    assert_eq!(outside, json!([]), "past the edge of a 390 px window");
    s.screenshot(1280, 800, &dir.path().join("again.png"));

    // Save through the page's button: the browser downloads decisions.csv.
    s.click("#save");
    let saved = downloads.join("decisions.csv");
    let t0 = Instant::now();
    while !saved.exists() && t0.elapsed() < Duration::from_secs(15) {
        std::thread::sleep(Duration::from_millis(100));
    }
    assert!(saved.exists(), "the browser saved no decisions.csv");
    std::thread::sleep(Duration::from_millis(200));
    let text = std::fs::read_to_string(&saved).unwrap();
    let from_page = s.script("return window.regionkeyDecisionsCsv()");
    assert_eq!(text, from_page.as_str().unwrap());
    // The review file says which years each name covers; the decisions keep them.
    let review = std::fs::read_to_string(demo.join("review-first-pass.csv")).unwrap();
    let header = if review.starts_with("name,state,years,") {
        "name,state,years,chosen_code\n"
    } else {
        "name,state,chosen_code\n"
    };
    assert!(text.starts_with(header), "{text}");
    assert_eq!(text.lines().count(), 6, "{text}");
    drop(s);

    // match takes the file as it is.
    let matched = dir.path().join("matched.csv");
    regionkey()
        .args(["-q", "match"])
        .arg(demo.join("input/food-bank-reports.csv"))
        .args(["--name-column", "county", "--state-column", "state"])
        .args(["--vintage-column", "year", "--decisions"])
        .arg(&saved)
        .arg("--output")
        .arg(&matched)
        .arg("--review")
        .arg(dir.path().join("review.csv"))
        .assert()
        .success();
    let mut r = csv::Reader::from_path(&matched).unwrap();
    let h = r.headers().unwrap().clone();
    let col = |n: &str| h.iter().position(|x| x == n).unwrap();
    let (county, code, status, method) = (
        col("county"),
        col("code"),
        col("match_status"),
        col("match_method"),
    );
    let mut seen = 0;
    for row in r.records() {
        let row = row.unwrap();
        let expect = match &row[county] {
            "Richmond, VA" => Some(("51760", "matched")),
            "Baltimore, MD" => Some(("24005", "matched")),
            "Chicago" | "Statewide" | "Unknown" => Some(("", "unmatched")),
            _ => None,
        };
        if let Some((c, st)) = expect {
            assert_eq!(
                (&row[code], &row[status], &row[method]),
                (c, st, "decision")
            );
            seen += 1;
        }
    }
    assert_eq!(
        seen,
        rows.iter().sum::<u64>() as usize,
        "every row of the cards"
    );
    // The analyst's hand-written decisions give the same matched table.
    assert_eq!(
        std::fs::read(&matched).unwrap(),
        std::fs::read(demo.join("matched.csv")).unwrap(),
        "same bytes as the demo's matched.csv"
    );
}
