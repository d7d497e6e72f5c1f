//! Errors of the HTTP service as RFC 9457 problem details
//! (`application/problem+json`). Each kind has a stable `type` URI, listed
//! in the README; 4xx details say what to change, 5xx details say nothing
//! internal (the cause is logged instead).

use axum::http::{HeaderValue, StatusCode, header};
use axum::response::{IntoResponse, Response};
use serde::Serialize;

/// One error of the service.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ApiError {
    /// The body or a query parameter is malformed or out of bounds (400/422).
    #[error("{detail}")]
    Invalid {
        /// 400 (not parseable) or 422 (parseable but wrong).
        status: StatusCode,
        /// The field at fault, as a JSON path (`readings[3].ts`) or a parameter name.
        field: String,
        /// What is wrong and what to do.
        detail: String,
    },
    /// No bearer key, or one the service does not know (401).
    #[error("{0}")]
    Unauthorized(String),
    /// A key without the scope the route needs (403).
    #[error("{0}")]
    Forbidden(String),
    /// The asset, suspicion or route does not exist (404).
    #[error("{detail}")]
    NotFound {
        /// What was looked for (`asset`, `suspicion`).
        what: &'static str,
        /// What is missing and how to find what exists.
        detail: String,
    },
    /// An idempotency key reused for different content (409).
    #[error("{0}")]
    Conflict(String),
    /// The body is larger than the configured limit (413).
    #[error("{0}")]
    TooLarge(String),
    /// The body's media type is not accepted (415).
    #[error("{0}")]
    UnsupportedMedia(String),
    /// The request took longer than the request timeout (503).
    #[error("the request took longer than the service's timeout of {0} s; send a smaller window")]
    Timeout(u64),
    /// Anything the caller cannot fix (500); the cause is logged, not sent.
    #[error("internal error: {0}")]
    Internal(String),
}

impl ApiError {
    /// A 422 for `field`.
    pub fn invalid(field: impl Into<String>, detail: impl Into<String>) -> Self {
        ApiError::Invalid {
            status: StatusCode::UNPROCESSABLE_ENTITY,
            field: field.into(),
            detail: detail.into(),
        }
    }

    /// A 400 for `field` (the body or parameter cannot be parsed at all).
    pub fn bad_request(field: impl Into<String>, detail: impl Into<String>) -> Self {
        ApiError::Invalid {
            status: StatusCode::BAD_REQUEST,
            field: field.into(),
            detail: detail.into(),
        }
    }

    /// A 500 whose cause goes to the log only.
    pub fn internal(cause: impl std::fmt::Display) -> Self {
        ApiError::Internal(cause.to_string())
    }

    /// The HTTP status.
    pub fn status(&self) -> StatusCode {
        match self {
            ApiError::Invalid { status, .. } => *status,
            ApiError::Unauthorized(_) => StatusCode::UNAUTHORIZED,
            ApiError::Forbidden(_) => StatusCode::FORBIDDEN,
            ApiError::NotFound { .. } => StatusCode::NOT_FOUND,
            ApiError::Conflict(_) => StatusCode::CONFLICT,
            ApiError::TooLarge(_) => StatusCode::PAYLOAD_TOO_LARGE,
            ApiError::UnsupportedMedia(_) => StatusCode::UNSUPPORTED_MEDIA_TYPE,
            ApiError::Timeout(_) => StatusCode::SERVICE_UNAVAILABLE,
            ApiError::Internal(_) => StatusCode::INTERNAL_SERVER_ERROR,
        }
    }

    /// The stable `type` URI and title of the problem.
    pub fn kind(&self) -> (&'static str, &'static str) {
        match self {
            ApiError::Invalid { status, .. } if *status == StatusCode::BAD_REQUEST => {
                ("/problems/malformed-request", "Malformed request")
            }
            ApiError::Invalid { .. } => ("/problems/invalid-field", "Invalid field"),
            ApiError::Unauthorized(_) => ("/problems/unauthorized", "Missing or unknown API key"),
            ApiError::Forbidden(_) => ("/problems/forbidden", "API key lacks the scope"),
            ApiError::NotFound { what: "asset", .. } => {
                ("/problems/unknown-asset", "Unknown asset")
            }
            ApiError::NotFound { what: "suspicion", .. } => {
                ("/problems/unknown-suspicion", "Unknown suspicion")
            }
            ApiError::NotFound { .. } => ("/problems/not-found", "Not found"),
            ApiError::Conflict(_) => ("/problems/idempotency-conflict", "Idempotency key reused"),
            ApiError::TooLarge(_) => ("/problems/body-too-large", "Body too large"),
            ApiError::UnsupportedMedia(_) => {
                ("/problems/unsupported-media-type", "Unsupported media type")
            }
            ApiError::Timeout(_) => ("/problems/timeout", "Request timed out"),
            ApiError::Internal(_) => ("/problems/internal", "Internal error"),
        }
    }

    /// The problem document for a request to `instance`.
    pub fn problem(&self, instance: &str) -> Problem {
        let (type_uri, title) = self.kind();
        let detail = match self {
            ApiError::Internal(_) => {
                "the service failed to handle the request; it is logged, try again".to_owned()
            }
            other => other.to_string(),
        };
        Problem {
            type_uri,
            title,
            status: self.status().as_u16(),
            detail,
            instance: instance.to_owned(),
            field: match self {
                ApiError::Invalid { field, .. } => Some(field.clone()),
                _ => None,
            },
        }
    }
}

/// RFC 9457 problem details, with the extension member `field` naming the
/// field at fault.
#[derive(Debug, Clone, Serialize)]
pub struct Problem {
    /// Stable URI reference of the problem kind.
    #[serde(rename = "type")]
    pub type_uri: &'static str,
    /// Short summary of the kind.
    pub title: &'static str,
    /// HTTP status.
    pub status: u16,
    /// What went wrong here and what to change.
    pub detail: String,
    /// The request path.
    pub instance: String,
    /// The field or parameter at fault (JSON path or name).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub field: Option<String>,
}

/// The error as a response; the path is filled in by the service's
/// middleware from a response extension (see [`super::problem_layer`]).
impl IntoResponse for ApiError {
    fn into_response(self) -> Response {
        if let ApiError::Internal(cause) = &self {
            tracing::error!(%cause, "request failed");
        }
        let status = self.status();
        let body = self.problem("");
        let mut resp = problem_response(status, &body);
        resp.extensions_mut().insert(ProblemMarker);
        resp
    }
}

/// Marks a response built from an [`ApiError`], so the middleware can put
/// the request path in `instance`.
#[derive(Debug, Clone, Copy)]
pub(crate) struct ProblemMarker;

/// A problem response with the right media type.
pub(crate) fn problem_response(status: StatusCode, p: &Problem) -> Response {
    let body = serde_json::to_vec(p).unwrap_or_else(|_| b"{}".to_vec());
    let mut resp = (status, body).into_response();
    resp.headers_mut()
        .insert(header::CONTENT_TYPE, HeaderValue::from_static("application/problem+json"));
    resp
}
