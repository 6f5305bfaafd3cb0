//! Headless Chromium driven over the DevTools protocol: start it (the flags this machine needs as root, a fresh profile), open one page target, send commands over a minimal WebSocket client (RFC 6455: masked client text frames, no extensions), evaluate JavaScript, take PNG screenshots.

use std::io::{Read, Write};
use std::net::TcpStream;
use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use super::{free_port, wait_for};

/// The chromium binary (Debian's package, installed by scripts/install-monitoring-deps.sh).
pub fn chromium_path() -> String {
    for p in ["/usr/bin/chromium", "/usr/bin/chromium-browser"] {
        if Path::new(p).exists() {
            return p.to_string();
        }
    }
    panic!("chromium is not installed: run scripts/install-deps.sh (it installs Debian's chromium)")
}

/// A headless Chromium with one page; killed on drop.
pub struct Browser {
    child: Child,
    ws: TcpStream,
    next_id: u64,
}

impl Browser {
    /// Start Chromium with a profile under `dir` and connect to its first page.
    pub fn start(dir: &Path, width: u32, height: u32) -> Browser {
        let port = free_port();
        let profile = dir.join("chromium-profile");
        std::fs::create_dir_all(&profile).unwrap();
        let log = std::fs::File::create(dir.join("chromium.log")).unwrap();
        let child = Command::new(chromium_path())
            .args([
                "--headless",
                "--no-sandbox",
                "--disable-gpu",
                "--disable-quic",
                "--no-first-run",
                "--disable-background-networking",
                "--disable-component-update",
                "--disable-sync",
                "--hide-scrollbars",
            ])
            .arg(format!("--user-data-dir={}", profile.display()))
            .arg(format!("--remote-debugging-port={port}"))
            .arg(format!("--window-size={width},{height}"))
            .arg("about:blank")
            .stdout(Stdio::null())
            .stderr(log)
            .spawn()
            .expect("start chromium");
        // Killed on drop from here on, also when the start fails.
        let mut guard = KillOnDrop(Some(child));
        let url = wait_for(Duration::from_secs(30), "chromium's DevTools page target", || {
            let body = devtools_get(port, "/json/list")?;
            let targets: serde_json::Value = serde_json::from_str(&body).ok()?;
            let page = targets.as_array()?.iter().find(|t| t["type"] == "page")?;
            page["webSocketDebuggerUrl"].as_str().map(str::to_string)
        });
        let ws = ws_connect(&url);
        let mut b = Browser { child: guard.0.take().expect("child"), ws, next_id: 0 };
        b.call(
            "Emulation.setDeviceMetricsOverride",
            serde_json::json!({"width": width, "height": height, "deviceScaleFactor": 1, "mobile": false}),
        );
        b
    }

    /// Send one command and wait for its answer (events in between are skipped).
    pub fn call(&mut self, method: &str, params: serde_json::Value) -> serde_json::Value {
        self.next_id += 1;
        let id = self.next_id;
        let msg = serde_json::json!({"id": id, "method": method, "params": params}).to_string();
        ws_send(&mut self.ws, msg.as_bytes());
        let deadline = Instant::now() + Duration::from_secs(30);
        loop {
            assert!(Instant::now() < deadline, "no answer to {method}");
            let text = ws_recv(&mut self.ws);
            let v: serde_json::Value = serde_json::from_str(&text).expect("DevTools message is JSON");
            if v["id"] == id {
                assert!(v.get("error").is_none(), "{method} failed: {}", v["error"]);
                return v["result"].clone();
            }
        }
    }

    pub fn navigate(&mut self, url: &str) {
        self.call("Page.navigate", serde_json::json!({"url": url}));
    }

    /// Evaluate an expression in the page; its value as JSON.
    pub fn eval(&mut self, expr: &str) -> serde_json::Value {
        let r = self.call("Runtime.evaluate", serde_json::json!({"expression": expr, "returnByValue": true}));
        assert!(r.get("exceptionDetails").is_none(), "{expr} threw: {}", r["exceptionDetails"]);
        r["result"]["value"].clone()
    }

    /// A PNG of the page as it is now.
    pub fn screenshot_png(&mut self) -> Vec<u8> {
        let r = self.call("Page.captureScreenshot", serde_json::json!({"format": "png", "captureBeyondViewport": true}));
        base64_decode(r["data"].as_str().expect("screenshot data"))
    }
}

impl Drop for Browser {
    fn drop(&mut self) {
        let _ = self.child.kill();
        let _ = self.child.wait();
    }
}

struct KillOnDrop(Option<Child>);

impl Drop for KillOnDrop {
    fn drop(&mut self) {
        if let Some(c) = &mut self.0 {
            let _ = c.kill();
            let _ = c.wait();
        }
    }
}

/// GET on the DevTools HTTP endpoint, which keeps connections open: read exactly Content-Length bytes.
fn devtools_get(port: u16, path: &str) -> Option<String> {
    let mut s = TcpStream::connect_timeout(&([127, 0, 0, 1], port).into(), Duration::from_secs(2)).ok()?;
    s.set_read_timeout(Some(Duration::from_secs(5))).ok()?;
    s.write_all(format!("GET {path} HTTP/1.1\r\nHost: 127.0.0.1:{port}\r\n\r\n").as_bytes()).ok()?;
    let mut head = Vec::new();
    let mut byte = [0u8; 1];
    while !head.ends_with(b"\r\n\r\n") {
        s.read_exact(&mut byte).ok()?;
        head.push(byte[0]);
    }
    let head = String::from_utf8_lossy(&head).to_ascii_lowercase();
    if !head.starts_with("http/1.1 200") {
        return None;
    }
    let len: usize = head.lines().find_map(|l| l.strip_prefix("content-length:"))?.trim().parse().ok()?;
    let mut body = vec![0u8; len];
    s.read_exact(&mut body).ok()?;
    String::from_utf8(body).ok()
}

fn ws_connect(url: &str) -> TcpStream {
    let rest = url.strip_prefix("ws://").expect("a ws:// URL");
    let (host, path) = rest.split_once('/').expect("a path");
    let mut s = TcpStream::connect(host).expect("connect to DevTools");
    s.set_read_timeout(Some(Duration::from_secs(30))).unwrap();
    // The key is fixed: the handshake's purpose here is the upgrade, not proof of a WebSocket peer.
    let req = format!(
        "GET /{path} HTTP/1.1\r\nHost: {host}\r\nUpgrade: websocket\r\nConnection: Upgrade\r\n\
         Sec-WebSocket-Key: dGhlIHNhbXBsZSBub25jZQ==\r\nSec-WebSocket-Version: 13\r\n\r\n"
    );
    s.write_all(req.as_bytes()).unwrap();
    let mut head = Vec::new();
    let mut byte = [0u8; 1];
    while !head.ends_with(b"\r\n\r\n") {
        s.read_exact(&mut byte).expect("handshake answer");
        head.push(byte[0]);
    }
    let head = String::from_utf8_lossy(&head);
    assert!(head.starts_with("HTTP/1.1 101"), "WebSocket upgrade refused: {head}");
    s
}

fn ws_send(s: &mut TcpStream, payload: &[u8]) {
    let mut frame = vec![0x81u8];
    let n = payload.len();
    if n < 126 {
        frame.push(0x80 | n as u8);
    } else if n < 65536 {
        frame.push(0x80 | 126);
        frame.extend_from_slice(&(n as u16).to_be_bytes());
    } else {
        frame.push(0x80 | 127);
        frame.extend_from_slice(&(n as u64).to_be_bytes());
    }
    let mask = [0x5a, 0x17, 0xc3, 0x9e];
    frame.extend_from_slice(&mask);
    frame.extend(payload.iter().enumerate().map(|(i, b)| b ^ mask[i % 4]));
    s.write_all(&frame).unwrap();
}

/// One whole text message (continuation frames joined; pings answered are not needed here).
fn ws_recv(s: &mut TcpStream) -> String {
    let mut msg = Vec::new();
    loop {
        let mut h = [0u8; 2];
        s.read_exact(&mut h).expect("WebSocket frame header");
        let fin = h[0] & 0x80 != 0;
        let opcode = h[0] & 0x0f;
        let mut len = (h[1] & 0x7f) as u64;
        if len == 126 {
            let mut b = [0u8; 2];
            s.read_exact(&mut b).unwrap();
            len = u16::from_be_bytes(b) as u64;
        } else if len == 127 {
            let mut b = [0u8; 8];
            s.read_exact(&mut b).unwrap();
            len = u64::from_be_bytes(b);
        }
        let mut data = vec![0u8; len as usize];
        s.read_exact(&mut data).expect("WebSocket frame payload");
        match opcode {
            0x0 | 0x1 => msg.extend_from_slice(&data),
            0x8 => panic!("DevTools closed the WebSocket"),
            _ => continue,
        }
        if fin {
            return String::from_utf8(msg).expect("text frame is UTF-8");
        }
    }
}

/// Standard base64 (RFC 4648) without line breaks.
pub fn base64_decode(s: &str) -> Vec<u8> {
    let val = |c: u8| -> u32 {
        match c {
            b'A'..=b'Z' => (c - b'A') as u32,
            b'a'..=b'z' => (c - b'a' + 26) as u32,
            b'0'..=b'9' => (c - b'0' + 52) as u32,
            b'+' => 62,
            b'/' => 63,
            _ => panic!("not base64: {c}"),
        }
    };
    let bytes: Vec<u8> = s.bytes().filter(|c| *c != b'=' && !c.is_ascii_whitespace()).collect();
    let mut out = Vec::with_capacity(bytes.len() * 3 / 4);
    for chunk in bytes.chunks(4) {
        let mut acc = 0u32;
        for (i, &c) in chunk.iter().enumerate() {
            acc |= val(c) << (18 - 6 * i);
        }
        out.push((acc >> 16) as u8);
        if chunk.len() > 2 {
            out.push((acc >> 8) as u8);
        }
        if chunk.len() > 3 {
            out.push(acc as u8);
        }
    }
    out
}
