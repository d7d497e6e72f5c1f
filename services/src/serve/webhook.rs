//! Outbound notification of new and escalated suspicions.
//!
//! Scoring writes a row to the database's outbox in the same transaction as
//! the suspicion (see [`super::db::Db::record_window`]), so an acknowledged
//! suspicion's notification cannot be lost. A worker thread posts each due
//! row to the configured URL and marks it delivered on a 2xx answer; any
//! other answer or a network error schedules a retry after
//! `base · 2^attempts`, at most ten minutes. After a restart the worker goes
//! on with the undelivered rows, and a delivered row is never sent again.
//! Delivery is at least once: if the process dies between the receiver's
//! answer and the commit of "delivered", that row is sent again with the
//! same `Idempotency-Key`, by which the receiver can drop the repeat.
//!
//! Each request carries
//!
//! ```text
//! Content-Type: application/json
//! Idempotency-Key: SUSPICION_ID:EVENT            EVENT = new | escalated
//! X-Telltale-Timestamp: UNIX_SECONDS
//! X-Telltale-Signature: sha256=HEX(HMAC-SHA256(secret, UNIX_SECONDS + "." + body))
//! ```
//!
//! and the body `{"event", "idempotency_key", "suspicion": {...}}`. Only
//! `http://` URLs are supported: this build carries no TLS, so reach an
//! `https://` endpoint through a local relay.
//!
//! # References
//! H. Krawczyk, M. Bellare, R. Canetti (1997), "HMAC: Keyed-Hashing for
//! Message Authentication", RFC 2104.

use super::AppState;
use sha2::{Digest, Sha256};
use std::time::Duration;

/// Webhook settings.
#[derive(Debug, Clone)]
pub struct WebhookConfig {
    /// `http://host:port/path`.
    pub url: String,
    /// The shared secret of the signature.
    pub secret: Vec<u8>,
    /// Notify suspicions whose score reaches this.
    pub min_score: f64,
    /// First retry delay.
    pub retry_base: Duration,
}

/// HMAC-SHA256 (RFC 2104) of `msg` under `key`.
pub fn hmac_sha256(key: &[u8], msg: &[u8]) -> [u8; 32] {
    const BLOCK: usize = 64;
    let mut k = [0u8; BLOCK];
    if key.len() > BLOCK {
        k[..32].copy_from_slice(&Sha256::digest(key));
    } else {
        k[..key.len()].copy_from_slice(key);
    }
    let mut inner = Sha256::new();
    inner.update(k.map(|b| b ^ 0x36));
    inner.update(msg);
    let mut outer = Sha256::new();
    outer.update(k.map(|b| b ^ 0x5c));
    outer.update(inner.finalize());
    outer.finalize().into()
}

fn hex(b: &[u8]) -> String {
    b.iter().map(|x| format!("{x:02x}")).collect()
}

/// The signature header value for a body sent at `unix_s`.
pub fn signature(secret: &[u8], unix_s: i64, body: &str) -> String {
    format!("sha256={}", hex(&hmac_sha256(secret, format!("{unix_s}.{body}").as_bytes())))
}

/// Delivers the outbox until the process ends.
pub(crate) fn spawn_worker(state: AppState, cfg: WebhookConfig) -> std::io::Result<()> {
    std::thread::Builder::new().name("telltale-webhook".into()).spawn(move || {
        let agent: ureq::Agent = ureq::Agent::config_builder()
            .timeout_global(Some(Duration::from_secs(10)))
            .http_status_as_error(false)
            .build()
            .into();
        loop {
            let now = chrono::Utc::now();
            let due = match state.db().due_outbox(now.timestamp_millis(), 50) {
                Ok(d) => d,
                Err(e) => {
                    tracing::error!(error = %e, "reading the webhook outbox");
                    Vec::new()
                }
            };
            for item in &due {
                let t = chrono::Utc::now().timestamp();
                let sent = agent
                    .post(&cfg.url)
                    .header("Content-Type", "application/json")
                    .header("Idempotency-Key", &item.idempotency_key)
                    .header("X-Telltale-Timestamp", &t.to_string())
                    .header("X-Telltale-Signature", &signature(&cfg.secret, t, &item.body))
                    .send(item.body.as_bytes());
                let outcome = match sent {
                    Ok(r) if r.status().is_success() => Ok(()),
                    Ok(r) => Err(format!("answered {}", r.status())),
                    Err(e) => Err(e.to_string()),
                };
                let result = match &outcome {
                    Ok(()) => Ok(()),
                    Err(why) => {
                        let shift = u32::try_from(item.attempts.clamp(0, 20)).unwrap_or(20);
                        let wait = cfg.retry_base.saturating_mul(1u32 << shift).min(Duration::from_secs(600));
                        tracing::warn!(key = %item.idempotency_key, error = %why, retry_in_ms = wait.as_millis() as u64, "webhook delivery failed");
                        let at = chrono::Utc::now().timestamp_millis()
                            + i64::try_from(wait.as_millis()).unwrap_or(600_000);
                        Err((why.as_str(), at))
                    }
                };
                if let Err(e) = state.db().outbox_attempt(item.seq, result) {
                    tracing::error!(error = %e, "recording a webhook attempt");
                }
            }
            if due.is_empty() {
                std::thread::sleep(Duration::from_millis(200));
            }
        }
    })?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hmac_matches_the_rfc_4231_test_vectors() {
        // expected values: RFC 4231 (HMAC-SHA256 test vectors), from memory; the
        // integration test also checks signatures with the `hmac` crate
        // RFC 4231 section 4.2, test case 1
        assert_eq!(
            hex(&hmac_sha256(&[0x0b; 20], b"Hi There")),
            "b0344c61d8db38535ca8afceaf0bf12b881dc200c9833da726e9376c2e32cff7"
        );
        // section 4.3, test case 2
        assert_eq!(
            hex(&hmac_sha256(b"Jefe", b"what do ya want for nothing?")),
            "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843"
        );
        // section 4.7, test case 6: a key longer than the block is hashed first
        assert_eq!(
            hex(&hmac_sha256(
                &[0xaa; 131],
                b"Test Using Larger Than Block-Size Key - Hash Key First"
            )),
            "60e431591ee0b67f0d8a26aacbf5b77f8e0bc6213728c5140546040f0ee37f54"
        );
    }
}
