//! The OpenAPI 3.1 document, generated from [`super::ROUTES`] (paths,
//! methods, parameters, bodies, responses, security) plus the schemas here.

use super::ROUTES;
use super::db::Scope;
use serde_json::{Map, Value, json};

fn schemas() -> Value {
    let time = json!({"type": "string", "format": "date-time"});
    json!({
        "Reading": {
            "type": "object", "required": ["sensor", "ts", "value"], "additionalProperties": false,
            "properties": {
                "sensor": {"type": "string", "minLength": 1},
                "ts": time,
                "value": {"type": ["number", "null"], "description": "finite; null = missing reading"},
                "quality": {"oneOf": [
                    {"type": "string", "enum": ["good", "uncertain", "bad"]},
                    {"type": "integer", "minimum": 0, "maximum": 255, "description": "0 = good"}]}
            }
        },
        "Window": {
            "type": "object", "required": ["asset", "readings"], "additionalProperties": false,
            "description": "One asset's readings. Each sensor's readings in strictly increasing time; \
                            readings may start up to the warm-up (3 days) before `from`.",
            "properties": {
                "asset": {"type": "string", "minLength": 1},
                "from": {"type": "string", "format": "date-time", "description": "default: the first reading"},
                "to": {"type": "string", "format": "date-time", "description": "exclusive; default: just after the last reading"},
                "readings": {"type": "array", "minItems": 1, "items": {"$ref": "#/components/schemas/Reading"}}
            }
        },
        "Evidence": {
            "type": "object", "required": ["test", "statistic", "threshold", "detail"],
            "properties": {
                "test": {"type": "string"}, "statistic": {"type": "number"},
                "threshold": {"type": "number"}, "p_value": {"type": "number"},
                "detail": {"type": "string"}
            }
        },
        "Suspicion": {
            "type": "object",
            "description": "The record of the suspicions file contract, with its review state",
            "required": ["id", "rank", "asset", "sensor", "class", "mode", "score", "magnitude",
                         "onset", "detected", "summary", "evidence", "status"],
            "properties": {
                "id": {"type": "string"}, "rank": {"type": "integer", "minimum": 0},
                "asset": {"type": "string"}, "sensor": {"type": ["string", "null"]},
                "class": {"type": "string", "enum": ["sensor_fault", "process_change", "equipment_fault"]},
                "mode": {"type": "string"},
                "score": {"type": "number", "minimum": 0, "maximum": 1},
                "magnitude": {"type": "number"}, "onset": time, "detected": time,
                "summary": {"type": "string"},
                "evidence": {"type": "array", "items": {"$ref": "#/components/schemas/Evidence"}},
                "status": {"type": "string", "enum": ["open", "confirmed", "dismissed", "process_change_accepted"]},
                "priority": {"type": "number"}, "first_scored": time, "last_scored": time,
                "times_scored": {"type": "integer"}
            }
        },
        "ScoreResult": {
            "type": "object", "required": ["asset", "from", "to", "readings", "warnings", "suspicions"],
            "properties": {
                "asset": {"type": "string"}, "from": time, "to": time,
                "readings": {"type": "integer"},
                "sensors_judged": {"type": "array", "items": {"type": "string"}},
                "warnings": {"type": "array", "items": {"type": "string"}},
                "suspicions": {"type": "array", "items": {"$ref": "#/components/schemas/Suspicion"}}
            }
        },
        "SuspicionPage": {
            "type": "object", "required": ["items", "next_cursor"],
            "properties": {
                "items": {"type": "array", "items": {"$ref": "#/components/schemas/Suspicion"}},
                "next_cursor": {"type": ["string", "null"]}
            }
        },
        "Feedback": {
            "type": "object",
            "properties": {
                "seq": {"type": "integer"}, "suspicion_id": {"type": "string"}, "received": time,
                "key_id": {"type": ["string", "null"]},
                "verdict": {"type": "string", "enum": ["confirmed", "dismissed", "process_change_accepted"]},
                "note": {"type": "string"}, "work_order": {"type": ["string", "null"]},
                "idempotency_key": {"type": ["string", "null"]}
            }
        },
        "SuspicionDetail": {
            "allOf": [{"$ref": "#/components/schemas/Suspicion"}, {
                "type": "object",
                "properties": {
                    "feedback": {"type": "array", "items": {"$ref": "#/components/schemas/Feedback"}},
                    "rebaseline": {"oneOf": [{"$ref": "#/components/schemas/Rebaseline"}, {"type": "null"}]}
                }
            }]
        },
        "Rebaseline": {
            "type": "object",
            "description": "the re-baseline an accepted process change asked for",
            "properties": {
                "suspicion_id": {"type": "string"}, "asset": {"type": "string"},
                "sensor": {"type": ["string", "null"]}, "onset": time,
                "state": {"type": "string", "enum": ["pending", "done", "failed"]},
                "attempts": {"type": "integer"}, "detail": {"type": "string"},
                "version": {"type": ["integer", "null"]}, "created": time, "updated": time
            }
        },
        "BaselineVersions": {
            "type": "object", "required": ["asset", "items"],
            "properties": {
                "asset": {"type": "string"},
                "in_store": {"type": "integer", "description": "the version now in the store (recorded when first seen)"},
                "items": {"type": "array", "items": {"type": "object", "properties": {
                    "asset": {"type": "string"}, "version": {"type": "integer"}, "created": time,
                    "reason": {"type": "string", "enum": ["fit", "process_change_accepted"]},
                    "suspicion_id": {"type": ["string", "null"]}, "sensor": {"type": ["string", "null"]},
                    "from": {"type": ["string", "null"]}, "to": {"type": ["string", "null"]},
                    "detail": {"type": "string"}, "sha256": {"type": "string"}}}}
            }
        },
        "FeedbackRequest": {
            "type": "object", "required": ["verdict", "note"], "additionalProperties": false,
            "properties": {
                "verdict": {"type": "string", "enum": ["confirmed", "dismissed", "process_change_accepted"]},
                "note": {"type": "string", "maxLength": 4000},
                "work_order": {"type": ["string", "null"], "maxLength": 200}
            }
        },
        "FeedbackResult": {
            "type": "object", "required": ["feedback", "replayed"],
            "properties": {
                "feedback": {"$ref": "#/components/schemas/Feedback"},
                "replayed": {"type": "boolean", "description": "true: a repeat; nothing new was written"},
                "status": {"type": ["string", "null"]},
                "rebaseline": {"oneOf": [{"$ref": "#/components/schemas/Rebaseline"}, {"type": "null"}]}
            }
        },
        "AssetList": {
            "type": "object", "required": ["items"],
            "properties": {"items": {"type": "array", "items": {"type": "object", "properties": {
                "asset": {"type": "string"}, "fit_from": {"type": ["string", "null"]},
                "fit_until": {"type": ["string", "null"]}, "written": {"type": ["string", "null"]},
                "baseline": {"type": "string"}}}}}
        },
        "StoredBaseline": {"type": "object", "description": "the baseline file written by telltale fit"},
        "Health": {
            "type": "object", "required": ["status"],
            "properties": {"status": {"type": "string"}, "version": {"type": "string"},
                           "schema_version": {"type": "integer"}, "open": {"type": "boolean"}}
        },
        "Problem": {
            "type": "object", "description": "RFC 9457 problem details",
            "required": ["type", "title", "status", "detail", "instance"],
            "properties": {
                "type": {"type": "string"}, "title": {"type": "string"},
                "status": {"type": "integer"}, "detail": {"type": "string"},
                "instance": {"type": "string"},
                "field": {"type": "string", "description": "the field or parameter at fault"}
            }
        }
    })
}

fn reason(code: u16) -> &'static str {
    match code {
        200 => "OK",
        201 => "Created",
        400 => "Malformed request",
        401 => "Missing or unknown API key",
        403 => "The key lacks the scope",
        404 => "Not found",
        409 => "Idempotency key reused for other content",
        413 => "Body too large",
        415 => "Unsupported media type",
        422 => "A field is invalid",
        503 => "Timed out",
        _ => "Internal error",
    }
}

/// The document.
pub fn openapi() -> Value {
    let mut paths: Map<String, Value> = Map::new();
    for r in ROUTES {
        let mut params: Vec<Value> = r
            .path
            .split('/')
            .filter_map(|seg| seg.strip_prefix('{').and_then(|s| s.strip_suffix('}')))
            .map(|name| json!({"name": name, "in": "path", "required": true, "schema": {"type": "string"}}))
            .collect();
        for (name, ty, desc) in r.query {
            params.push(json!({"name": name, "in": "query", "required": false,
                               "description": desc, "schema": {"type": ty}}));
        }
        if r.operation_id == "postFeedback" {
            params.push(json!({"name": "Idempotency-Key", "in": "header", "required": false,
                "description": "a repeat with the same key and content returns the stored feedback",
                "schema": {"type": "string", "maxLength": 200}}));
        }
        let mut responses: Map<String, Value> = Map::new();
        for (code, media, schema) in r.ok {
            let s = if schema.is_empty() {
                if media.starts_with("text/") {
                    json!({"type": "string"})
                } else {
                    json!({"type": "object"})
                }
            } else {
                json!({"$ref": format!("#/components/schemas/{schema}")})
            };
            let media = media.split(';').next().unwrap_or(media);
            responses.insert(
                code.to_string(),
                json!({"description": reason(*code), "content": {media: {"schema": s}}}),
            );
        }
        for code in r.errors {
            responses.insert(
                code.to_string(),
                json!({"description": reason(*code), "content": {"application/problem+json":
                    {"schema": {"$ref": "#/components/schemas/Problem"}}}}),
            );
        }
        let mut op = json!({
            "operationId": r.operation_id,
            "summary": r.summary,
            "parameters": params,
            "responses": responses,
        });
        match r.scope {
            Some(s) => {
                op["security"] = json!([{"bearerKey": []}]);
                op["x-scope"] = json!(s.as_str());
                if s == Scope::Write {
                    op["description"] = json!("needs a key of scope write");
                }
            }
            None => op["security"] = json!([]),
        }
        if let Some((media, schema)) = r.body {
            let content: Map<String, Value> = media
                .iter()
                .map(|m| {
                    let s = if *m == super::ARROW_STREAM {
                        json!({"type": "string", "contentMediaType": super::ARROW_STREAM,
                               "description": "record batches with columns sensor, ts, value \
                                               [, quality]; asset, from and to in the query"})
                    } else {
                        json!({"$ref": format!("#/components/schemas/{schema}")})
                    };
                    ((*m).to_owned(), json!({ "schema": s }))
                })
                .collect();
            op["requestBody"] = json!({"required": true, "content": content});
        }
        let entry = paths.entry(r.path.to_owned()).or_insert_with(|| json!({}));
        entry[r.method.as_str().to_ascii_lowercase()] = op;
    }
    json!({
        "openapi": "3.1.0",
        "info": {
            "title": "telltale",
            "version": env!("CARGO_PKG_VERSION"),
            "description": "Scores condition-monitoring windows, serves the suspicions and takes \
                            reviewers' feedback. Decision support only: not a protective or safety \
                            function."
        },
        "paths": paths,
        "components": {
            "schemas": schemas(),
            "securitySchemes": {"bearerKey": {"type": "http", "scheme": "bearer",
                "description": "an API key from `telltale keys add`"}}
        },
        "security": [{"bearerKey": []}]
    })
}

#[cfg(test)]
mod tests {
    #![allow(clippy::unwrap_used, reason = "test code: a panic is a failed test")]
    use super::*;

    #[test]
    fn every_route_is_documented_and_every_reference_resolves() {
        let doc = openapi();
        let mut documented = Vec::new();
        for (path, ops) in doc["paths"].as_object().unwrap() {
            for m in ops.as_object().unwrap().keys() {
                documented.push((m.to_ascii_uppercase(), path.clone()));
            }
        }
        documented.sort();
        let mut routes = super::super::route_list();
        routes.sort();
        assert_eq!(documented, routes);
        let text = doc.to_string();
        let schemas = doc["components"]["schemas"].as_object().unwrap();
        for part in text.split("#/components/schemas/").skip(1) {
            let name: String = part.chars().take_while(|c| c.is_ascii_alphanumeric()).collect();
            assert!(schemas.contains_key(&name), "unresolved schema {name}");
        }
    }
}
