//! The status page: `/` serves one self-contained HTML page (inline style and script, no external assets) that polls `/status.json`, which answers `DriftMonitor::status()`.

use axum::extract::State;
use axum::http::header;
use axum::response::{IntoResponse, Response};
use axum::Json;

use crate::admin::AdminState;

/// The page, compiled in.
pub const STATUS_PAGE_HTML: &str = include_str!("status_page.html");

pub async fn page() -> Response {
    (
        [
            (header::CONTENT_TYPE, "text/html; charset=utf-8"),
            (header::CACHE_CONTROL, "no-store"),
            (header::CONTENT_SECURITY_POLICY, "default-src 'none'; script-src 'unsafe-inline'; style-src 'unsafe-inline'; connect-src 'self'; img-src 'self' data:"),
        ],
        STATUS_PAGE_HTML,
    )
        .into_response()
}

pub async fn status_json(State(st): State<AdminState>) -> Response {
    match &st.drift {
        Some(d) => ([(header::CACHE_CONTROL, "no-store")], Json(d.status())).into_response(),
        None => (axum::http::StatusCode::NOT_FOUND, "no status\n").into_response(),
    }
}
