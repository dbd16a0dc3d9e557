//! The report in a real browser: headless Chromium (path in FLUXLOOM_CHROMIUM,
//! set by .ci/run) opens `report.html` from disk, driven over the Chrome
//! DevTools protocol on a loopback WebSocket. The page must load without a
//! console error and without any network request, render something (the
//! screenshot is not blank), and fit a phone-sized window (390 px wide: the
//! document is no wider than the viewport).

use std::io::{BufRead, BufReader};
use std::net::TcpStream;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use base64::Engine;
use serde_json::{Value, json};
use tungstenite::{Message, WebSocket};

/// The Chromium binary, or `None` when the test is to be skipped.
fn chromium() -> Option<PathBuf> {
    match std::env::var_os("FLUXLOOM_CHROMIUM") {
        Some(p) => Some(PathBuf::from(p)),
        None if std::env::var("CI").is_ok_and(|v| v == "true") => {
            panic!(
                "FLUXLOOM_CHROMIUM is unset under CI: .ci/run must install Chromium and export it"
            )
        }
        None => {
            println!(
                "skipped: FLUXLOOM_CHROMIUM is unset (set it to a Chromium binary to run the browser test)"
            );
            None
        }
    }
}

fn build_demo(out: &Path) {
    let plan = Path::new(env!("CARGO_MANIFEST_DIR")).join("demo_catalogs/fl1/plan.toml");
    let o = Command::new(env!("CARGO_BIN_EXE_fluxloom"))
        .args([
            "build",
            plan.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--quiet",
        ])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

/// A browser process and one DevTools session on one page.
struct Browser {
    child: Child,
    ws: WebSocket<TcpStream>,
    session: String,
    next_id: u64,
    /// Every event received, in order.
    events: Vec<Value>,
}

impl Browser {
    fn launch(binary: &Path, profile: &Path) -> Browser {
        let mut child = Command::new(binary)
            .args([
                "--headless",
                "--no-sandbox",
                "--disable-gpu",
                "--disable-quic",
                "--no-first-run",
                "--disable-background-networking",
                "--disable-component-update",
                "--disable-sync",
                "--disable-default-apps",
                "--disable-extensions",
                "--remote-debugging-address=127.0.0.1",
                "--remote-debugging-port=0",
                "--remote-allow-origins=*",
            ])
            .arg(format!("--user-data-dir={}", profile.display()))
            .arg("about:blank")
            .stdin(Stdio::null())
            .stdout(Stdio::null())
            .stderr(Stdio::piped())
            .spawn()
            .expect("start chromium");
        let stderr = child.stderr.take().unwrap();
        let (tx, rx) = std::sync::mpsc::channel();
        std::thread::spawn(move || {
            for line in BufReader::new(stderr).lines().map_while(|l| l.ok()) {
                if let Some(url) = line.split("DevTools listening on ").nth(1) {
                    let _ = tx.send(url.trim().to_string());
                }
            }
        });
        let url = rx
            .recv_timeout(Duration::from_secs(60))
            .expect("chromium did not print its DevTools address");
        let host = url
            .trim_start_matches("ws://")
            .split('/')
            .next()
            .unwrap()
            .to_string();
        let stream = TcpStream::connect(&host).unwrap();
        stream
            .set_read_timeout(Some(Duration::from_secs(60)))
            .unwrap();
        let (ws, _) = tungstenite::client(url.as_str(), stream).expect("DevTools handshake");
        let mut b = Browser {
            child,
            ws,
            session: String::new(),
            next_id: 0,
            events: Vec::new(),
        };
        let target = b.call("Target.createTarget", json!({ "url": "about:blank" }));
        let target_id = target["targetId"].as_str().unwrap().to_string();
        let attached = b.call(
            "Target.attachToTarget",
            json!({ "targetId": target_id, "flatten": true }),
        );
        b.session = attached["sessionId"].as_str().unwrap().to_string();
        for domain in [
            "Page.enable",
            "Runtime.enable",
            "Log.enable",
            "Network.enable",
        ] {
            b.call(domain, json!({}));
        }
        b
    }

    /// Sends a command (to the page session once attached) and waits for its result.
    fn call(&mut self, method: &str, params: Value) -> Value {
        self.next_id += 1;
        let id = self.next_id;
        let mut msg = json!({ "id": id, "method": method, "params": params });
        if !self.session.is_empty() {
            msg["sessionId"] = json!(self.session);
        }
        self.ws.send(Message::Text(msg.to_string().into())).unwrap();
        loop {
            let v = self.read();
            if v["id"] == json!(id) {
                assert!(v.get("error").is_none(), "{method}: {v}");
                return v["result"].clone();
            }
        }
    }

    fn read(&mut self) -> Value {
        loop {
            match self.ws.read().expect("DevTools message") {
                Message::Text(t) => {
                    let v: Value = serde_json::from_str(t.as_str()).unwrap();
                    if v.get("method").is_some() {
                        self.events.push(v.clone());
                    }
                    return v;
                }
                _ => continue,
            }
        }
    }

    /// Waits until an event named `method` has been received.
    fn wait_for(&mut self, method: &str) {
        let start = Instant::now();
        while !self.events.iter().any(|e| e["method"] == json!(method)) {
            assert!(start.elapsed() < Duration::from_secs(60), "no {method}");
            self.read();
        }
    }

    fn viewport(&mut self, width: u32, height: u32, mobile: bool) {
        self.call(
            "Emulation.setDeviceMetricsOverride",
            json!({ "width": width, "height": height, "deviceScaleFactor": 1, "mobile": mobile }),
        );
    }

    fn screenshot(&mut self) -> Vec<u8> {
        let r = self.call("Page.captureScreenshot", json!({ "format": "png" }));
        base64::engine::general_purpose::STANDARD
            .decode(r["data"].as_str().unwrap())
            .unwrap()
    }

    fn eval(&mut self, expression: &str) -> Value {
        let r = self.call(
            "Runtime.evaluate",
            json!({ "expression": expression, "returnByValue": true }),
        );
        r["result"]["value"].clone()
    }
}

impl Browser {
    /// Console errors and requests other than `page_url` seen so far.
    fn problems(&self, page_url: &str) -> (Vec<Value>, Vec<String>) {
        let errors = self
            .events
            .iter()
            .filter(|e| {
                let m = e["method"].as_str().unwrap_or("");
                (m == "Runtime.consoleAPICalled" && e["params"]["type"] == json!("error"))
                    || m == "Runtime.exceptionThrown"
                    || (m == "Log.entryAdded" && e["params"]["entry"]["level"] == json!("error"))
            })
            .cloned()
            .collect();
        let requests = self
            .events
            .iter()
            .filter(|e| e["method"] == json!("Network.requestWillBeSent"))
            .filter_map(|e| e["params"]["request"]["url"].as_str())
            .filter(|u| *u != page_url)
            .map(str::to_string)
            .collect();
        (errors, requests)
    }
}

impl Drop for Browser {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

/// Fraction of pixels differing from the most common colour, and the number of
/// distinct colours, of an RGB(A) PNG.
fn ink(png_bytes: &[u8]) -> (f64, usize) {
    let decoder = png::Decoder::new(std::io::Cursor::new(png_bytes));
    let mut reader = decoder.read_info().unwrap();
    let mut buf = vec![0; reader.output_buffer_size().unwrap()];
    let info = reader.next_frame(&mut buf).unwrap();
    let channels = info.color_type.samples();
    let pixels: Vec<&[u8]> = buf[..info.buffer_size()].chunks(channels).collect();
    let mut counts: std::collections::HashMap<&[u8], usize> = std::collections::HashMap::new();
    for p in &pixels {
        *counts.entry(&p[..3.min(channels)]).or_insert(0) += 1;
    }
    let most = counts.values().copied().max().unwrap_or(0);
    (1.0 - most as f64 / pixels.len() as f64, counts.len())
}

#[test]
fn the_report_loads_offline_without_errors_and_fits_a_phone() {
    let Some(binary) = chromium() else { return };
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("out");
    build_demo(&out);
    let page = out.join("report.html");
    let url = format!("file://{}", page.canonicalize().unwrap().display());

    let mut b = Browser::launch(&binary, &dir.path().join("profile"));
    b.viewport(1200, 900, false);
    b.call("Page.navigate", json!({ "url": url }));
    b.wait_for("Page.loadEventFired");
    // Let late console messages or requests arrive.
    b.eval("1");

    let wide = b.screenshot();
    let (wide_ink, wide_colours) = ink(&wide);
    b.viewport(390, 844, true);
    let widths = b.eval(
        "[document.documentElement.scrollWidth, document.body.scrollWidth, window.innerWidth]",
    );
    let narrow = b.screenshot();
    let (narrow_ink, _) = ink(&narrow);
    std::fs::write(dir.path().join("wide.png"), &wide).unwrap();

    let (console_errors, requests) = b.problems(&url);
    assert!(
        console_errors.is_empty(),
        "console errors: {console_errors:?}"
    );
    assert!(requests.is_empty(), "the report fetched: {requests:?}");
    println!(
        "screenshot 1200 px: {:.1} % ink, {wide_colours} colours; 390 px: {:.1} % ink; widths (document, body, viewport) {widths}",
        100.0 * wide_ink,
        100.0 * narrow_ink
    );
    assert!(wide_ink > 0.02 && wide_colours > 8, "blank screenshot");
    assert!(narrow_ink > 0.02, "blank narrow screenshot");
    let w: Vec<f64> = widths
        .as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect();
    assert_eq!(w[2], 390.0, "viewport {widths}");
    assert!(
        w[0] <= w[2] && w[1] <= w[2],
        "the page overflows a 390 px window: {widths}"
    );
}

#[test]
fn the_checks_catch_a_console_error_and_a_request() {
    let Some(binary) = chromium() else { return };
    let dir = tempfile::tempdir().unwrap();
    let page = dir.path().join("bad.html");
    std::fs::write(
        &page,
        "<!DOCTYPE html><html><body><p>x</p><img src=\"http://127.0.0.1:9/x.png\"/><script>console.error(\"boom\")</script></body></html>",
    )
    .unwrap();
    let url = format!("file://{}", page.canonicalize().unwrap().display());
    let mut b = Browser::launch(&binary, &dir.path().join("profile"));
    b.call("Page.navigate", json!({ "url": url }));
    b.wait_for("Page.loadEventFired");
    b.eval("1");
    let (errors, requests) = b.problems(&url);
    assert!(
        errors.iter().any(|e| e.to_string().contains("boom")),
        "{errors:?}"
    );
    assert_eq!(requests, vec!["http://127.0.0.1:9/x.png".to_string()]);
}
