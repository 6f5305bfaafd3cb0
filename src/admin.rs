//! The admin HTTP endpoint (axum): `/metrics` (Prometheus text), `/healthz`, `/readyz`, `/model` and `/rules` (what is served, JSON), `/assignment` (owned partitions), `POST /classify`, `POST /reload`, and the status page `/` with its data `/status.json`; a bearer token guards all but metrics and health.

use std::sync::Arc;

use axum::body::Bytes;
use axum::extract::{Query, Request, State};
use axum::http::{header, HeaderMap, StatusCode};
use axum::middleware::{self, Next};
use axum::response::{IntoResponse, Response};
use axum::routing::{get, post};
use axum::{Json, Router as HttpRouter};
use tokio::net::TcpListener;
use tokio_util::sync::CancellationToken;

use crate::io::lines::render_line;
use crate::io::message::Inbound;
use crate::metrics::Metrics;
use crate::runtime::model_view::ModelHandle;
use crate::runtime::monitor::DriftMonitor;
use crate::runtime::reload::{Reloader, Trigger, What};
use crate::runtime::router::{RouteScratch, Router};
use crate::runtime::rules_view::RulesHandle;
use crate::runtime::Readiness;

/// Route paths, shared with the deploy manifests' consistency test.
pub const PATH_METRICS: &str = "/metrics";
pub const PATH_HEALTHZ: &str = "/healthz";
pub const PATH_READYZ: &str = "/readyz";
pub const PATH_MODEL: &str = "/model";
pub const PATH_CLASSIFY: &str = "/classify";
pub const PATH_ASSIGNMENT: &str = "/assignment";

/// The largest body `POST /classify` reads.
const MAX_CLASSIFY_BODY: usize = 1 << 20;

#[derive(Clone)]
pub struct AdminState {
    pub metrics: Arc<Metrics>,
    pub model: ModelHandle,
    pub rules: RulesHandle,
    /// `POST /reload` answers 503 without one.
    pub reloader: Option<Arc<Reloader>>,
    pub router: Arc<Router>,
    pub readiness: Arc<Readiness>,
    /// Required as `Authorization: Bearer <token>` on guarded routes when set.
    pub token: Option<String>,
    /// Drift and health numbers: refreshed at each scrape, and the status page's data.
    pub drift: Option<Arc<DriftMonitor>>,
    /// Serve the status page at `/` and `/status.json` (guarded like `/model`).
    pub status_page: bool,
}

/// The routes; guarded ones check the bearer token.
pub fn routes(state: AdminState) -> HttpRouter {
    let mut guarded = HttpRouter::new()
        .route(PATH_MODEL, get(model_info))
        .route("/rules", get(rules_info))
        .route(PATH_CLASSIFY, post(classify))
        .route("/reload", post(reload))
        .route(PATH_ASSIGNMENT, get(assignment));
    if state.status_page && state.drift.is_some() {
        guarded = guarded
            .route("/", get(crate::runtime::status::page))
            .route("/status.json", get(crate::runtime::status::status_json));
    }
    let guarded = guarded.route_layer(middleware::from_fn_with_state(state.clone(), require_token));
    HttpRouter::new()
        .route(PATH_METRICS, get(metrics))
        .route(PATH_HEALTHZ, get(|| async { "ok\n" }))
        .route(PATH_READYZ, get(readyz))
        .merge(guarded)
        .layer(axum::extract::DefaultBodyLimit::max(MAX_CLASSIFY_BODY))
        .with_state(state)
}

/// Serve until `stop` is cancelled.
pub async fn serve(listener: TcpListener, state: AdminState, stop: CancellationToken) {
    let app = routes(state);
    if let Err(e) = axum::serve(listener, app).with_graceful_shutdown(async move { stop.cancelled().await }).await {
        tracing::error!("admin endpoint stopped: {e}");
    }
}

async fn require_token(State(st): State<AdminState>, headers: HeaderMap, req: Request, next: Next) -> Response {
    if let Some(token) = &st.token {
        let given =
            headers.get(header::AUTHORIZATION).and_then(|v| v.to_str().ok()).and_then(|v| v.strip_prefix("Bearer "));
        if !given.is_some_and(|g| constant_time_eq(g.as_bytes(), token.as_bytes())) {
            return (StatusCode::UNAUTHORIZED, [(header::WWW_AUTHENTICATE, "Bearer")], "bearer token required\n")
                .into_response();
        }
    }
    next.run(req).await
}

fn constant_time_eq(a: &[u8], b: &[u8]) -> bool {
    a.len() == b.len() && a.iter().zip(b).fold(0u8, |acc, (x, y)| acc | (x ^ y)) == 0
}

async fn metrics(State(st): State<AdminState>) -> Response {
    if let Some(d) = &st.drift {
        d.refresh_gauges();
    }
    ([(header::CONTENT_TYPE, "text/plain; version=0.0.4; charset=utf-8")], st.metrics.render()).into_response()
}

async fn readyz(State(st): State<AdminState>) -> Response {
    if st.readiness.ready() {
        (StatusCode::OK, "ready\n").into_response()
    } else {
        let why = if st.readiness.model_loaded.load(std::sync::atomic::Ordering::SeqCst) {
            "waiting for the consumer group join\n"
        } else {
            "model not loaded\n"
        };
        (StatusCode::SERVICE_UNAVAILABLE, why).into_response()
    }
}

/// The source partitions this replica owns now (JSON), for checking coverage across replicas.
async fn assignment(State(st): State<AdminState>) -> Response {
    Json(st.readiness.assignment.view()).into_response()
}

/// `GET /model`; `?fingerprint=1` adds the count fingerprint (it hashes every row).
async fn model_info(State(st): State<AdminState>, Query(q): Query<std::collections::HashMap<String, String>>) -> Response {
    let view = st.model.current();
    let mut info = view.info();
    if q.get("fingerprint").is_some_and(|v| v == "1" || v == "true") {
        info.fingerprint = Some(view.model.fingerprint());
    }
    Json(info).into_response()
}

/// The served rules file, or `null` without one.
async fn rules_info(State(st): State<AdminState>) -> Response {
    Json(st.rules.current().map(|r| r.info())).into_response()
}

#[derive(serde::Deserialize)]
struct ReloadQuery {
    what: Option<String>,
}

/// Reload the model and/or the rules now (`?what=model|rules|both`, default
/// both) and answer what happened: 200 when everything asked for is served,
/// 422 when a file was refused (the old one keeps serving), 400 for an
/// unknown `what`.
async fn reload(State(st): State<AdminState>, Query(q): Query<ReloadQuery>) -> Response {
    let what = match What::parse(q.what.as_deref()) {
        Ok(w) => w,
        Err(e) => return (StatusCode::BAD_REQUEST, Json(serde_json::json!({ "error": e }))).into_response(),
    };
    let Some(reloader) = &st.reloader else {
        return (StatusCode::SERVICE_UNAVAILABLE, "reload is not available\n").into_response();
    };
    let report = reloader.reload(what, Trigger::Admin).await;
    let status = if report.succeeded(what) { StatusCode::OK } else { StatusCode::UNPROCESSABLE_ENTITY };
    (status, Json(report)).into_response()
}

/// The body is one record in the source codec; the answer is the output line the service would write.
async fn classify(State(st): State<AdminState>, body: Bytes) -> Response {
    let view = st.model.current();
    let rules = st.rules.current();
    let rec = Inbound {
        topic: "admin",
        partition: 0,
        offset: 0,
        key: None,
        payload: Some(&body),
        headers: Vec::new(),
        timestamp_ms: None,
    };
    let mut scratch = RouteScratch::default();
    let (out, decision) = st.router.route(&view, rules.as_deref().map(|r| &r.set), &rec, &mut scratch);
    let status = if decision.is_some() { StatusCode::OK } else { StatusCode::UNPROCESSABLE_ENTITY };
    (status, [(header::CONTENT_TYPE, "application/json")], render_line(&out)).into_response()
}
