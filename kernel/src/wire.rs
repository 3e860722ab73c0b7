//! Jupyter wire format: framing of multipart ZeroMQ messages and HMAC-SHA256 signing.
//!
//! A message on the wire is
//! `[identities…, "<IDS|MSG>", signature, header, parent_header, metadata, content, buffers…]`
//! (Jupyter messaging specification 5.3, "The Wire Protocol"). The signature is the
//! lower-case hex HMAC-SHA256, keyed with the connection file's `key`, over the four JSON
//! frames in that order. With an empty key, messages are neither signed nor checked.
//!
//! This is the only module that knows the byte layout; everything above it works with
//! [`Message`] values.

use std::fmt;

use hmac::{Hmac, Mac};
use serde_json::{json, Map, Value};
use sha2::Sha256;

/// The frame separating routing identities from the signed message.
pub const DELIMITER: &[u8] = b"<IDS|MSG>";

/// The messaging protocol version this kernel speaks (sent in every header).
pub const PROTOCOL_VERSION: &str = "5.3";

type HmacSha256 = Hmac<Sha256>;

/// Why an incoming multipart message was refused.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum WireError {
    /// No `<IDS|MSG>` frame.
    MissingDelimiter,
    /// Fewer than the five frames (signature + four JSON parts) after the delimiter.
    TooFewFrames(usize),
    /// The signature frame is empty although the kernel has a key.
    MissingSignature,
    /// The signature does not match (or is not hex).
    BadSignature,
    /// A JSON frame did not parse, or was not an object.
    BadJson { frame: &'static str, reason: String },
    /// The header lacks a required string field.
    MissingHeaderField(&'static str),
}

impl fmt::Display for WireError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            WireError::MissingDelimiter => write!(f, "no <IDS|MSG> delimiter frame"),
            WireError::TooFewFrames(n) => {
                write!(f, "only {n} frames after the delimiter (need at least 5)")
            }
            WireError::MissingSignature => write!(f, "message is not signed"),
            WireError::BadSignature => write!(f, "message signature does not match"),
            WireError::BadJson { frame, reason } => {
                write!(f, "{frame} is not a JSON object: {reason}")
            }
            WireError::MissingHeaderField(field) => {
                write!(f, "header has no string field `{field}`")
            }
        }
    }
}

impl std::error::Error for WireError {}

/// Signs and verifies messages with the connection key (HMAC-SHA256).
#[derive(Clone)]
pub struct Signer {
    /// `None` when the key is empty: no signing, no checking.
    mac: Option<HmacSha256>,
}

impl Signer {
    pub fn new(key: &[u8]) -> Signer {
        if key.is_empty() {
            return Signer { mac: None };
        }
        // HMAC accepts keys of any length, so this cannot fail.
        let mac = HmacSha256::new_from_slice(key).ok();
        Signer { mac }
    }

    pub fn is_signing(&self) -> bool {
        self.mac.is_some()
    }

    /// Lower-case hex signature of the four JSON frames ("" without a key).
    pub fn sign(&self, parts: [&[u8]; 4]) -> String {
        match &self.mac {
            None => String::new(),
            Some(mac) => {
                let mut mac = mac.clone();
                for part in parts {
                    mac.update(part);
                }
                hex::encode(mac.finalize().into_bytes())
            }
        }
    }

    /// Checks a received signature in constant time (`Mac::verify_slice`).
    pub fn verify(&self, signature: &[u8], parts: [&[u8]; 4]) -> Result<(), WireError> {
        let Some(mac) = &self.mac else {
            return Ok(());
        };
        if signature.is_empty() {
            return Err(WireError::MissingSignature);
        }
        let expected = hex::decode(signature).map_err(|_| WireError::BadSignature)?;
        let mut mac = mac.clone();
        for part in parts {
            mac.update(part);
        }
        mac.verify_slice(&expected)
            .map_err(|_| WireError::BadSignature)
    }
}

/// A decoded Jupyter message. Header fields are kept as received so that a reply can
/// carry the request's header verbatim as its parent header.
#[derive(Debug, Clone, PartialEq)]
pub struct Message {
    pub identities: Vec<Vec<u8>>,
    pub header: Map<String, Value>,
    pub parent_header: Map<String, Value>,
    pub metadata: Map<String, Value>,
    pub content: Value,
    pub buffers: Vec<Vec<u8>>,
}

impl Message {
    pub fn msg_type(&self) -> &str {
        self.header
            .get("msg_type")
            .and_then(Value::as_str)
            .unwrap_or("")
    }

    pub fn msg_id(&self) -> &str {
        self.header
            .get("msg_id")
            .and_then(Value::as_str)
            .unwrap_or("")
    }

    /// Parses a multipart message and checks its signature.
    pub fn decode(frames: Vec<Vec<u8>>, signer: &Signer) -> Result<Message, WireError> {
        let split = frames
            .iter()
            .position(|f| f.as_slice() == DELIMITER)
            .ok_or(WireError::MissingDelimiter)?;
        let mut frames = frames;
        let rest = frames.split_off(split + 1);
        frames.pop(); // the delimiter itself
        let identities = frames;
        if rest.len() < 5 {
            return Err(WireError::TooFewFrames(rest.len()));
        }
        let mut rest = rest.into_iter();
        let signature = rest.next().unwrap_or_default();
        let header_raw = rest.next().unwrap_or_default();
        let parent_raw = rest.next().unwrap_or_default();
        let metadata_raw = rest.next().unwrap_or_default();
        let content_raw = rest.next().unwrap_or_default();
        let buffers: Vec<Vec<u8>> = rest.collect();

        // Verify before parsing: an unsigned or badly signed message is never acted on.
        signer.verify(
            &signature,
            [&header_raw, &parent_raw, &metadata_raw, &content_raw],
        )?;

        let header = parse_object("header", &header_raw)?;
        for field in ["msg_id", "msg_type"] {
            if !header.get(field).is_some_and(Value::is_string) {
                return Err(WireError::MissingHeaderField(field));
            }
        }
        let parent_header = parse_object("parent_header", &parent_raw)?;
        let metadata = parse_object("metadata", &metadata_raw)?;
        let content = Value::Object(parse_object("content", &content_raw)?);
        Ok(Message {
            identities,
            header,
            parent_header,
            metadata,
            content,
            buffers,
        })
    }

    /// Serialises and signs the message into multipart frames.
    pub fn encode(&self, signer: &Signer) -> Vec<Vec<u8>> {
        let header = to_json_bytes(&Value::Object(self.header.clone()));
        let parent = to_json_bytes(&Value::Object(self.parent_header.clone()));
        let metadata = to_json_bytes(&Value::Object(self.metadata.clone()));
        let content = to_json_bytes(&self.content);
        let signature = signer.sign([&header, &parent, &metadata, &content]);
        let mut frames = Vec::with_capacity(self.identities.len() + 6 + self.buffers.len());
        frames.extend(self.identities.iter().cloned());
        frames.push(DELIMITER.to_vec());
        frames.push(signature.into_bytes());
        frames.push(header);
        frames.push(parent);
        frames.push(metadata);
        frames.push(content);
        frames.extend(self.buffers.iter().cloned());
        frames
    }
}

fn parse_object(frame: &'static str, raw: &[u8]) -> Result<Map<String, Value>, WireError> {
    match serde_json::from_slice::<Value>(raw) {
        Ok(Value::Object(map)) => Ok(map),
        Ok(other) => Err(WireError::BadJson {
            frame,
            reason: format!("found {}", kind_of(&other)),
        }),
        Err(e) => Err(WireError::BadJson {
            frame,
            reason: e.to_string(),
        }),
    }
}

fn kind_of(value: &Value) -> &'static str {
    match value {
        Value::Null => "null",
        Value::Bool(_) => "a boolean",
        Value::Number(_) => "a number",
        Value::String(_) => "a string",
        Value::Array(_) => "an array",
        Value::Object(_) => "an object",
    }
}

fn to_json_bytes(value: &Value) -> Vec<u8> {
    // Serialising a `Value` cannot fail (keys are strings, no non-finite floats survive
    // in a `Value`).
    serde_json::to_vec(value).unwrap_or_else(|_| b"{}".to_vec())
}

/// Builds the headers of the messages this kernel sends.
#[derive(Clone)]
pub struct HeaderFactory {
    /// This kernel process's session id (one per process, as the spec asks).
    pub session: String,
    pub username: String,
}

impl HeaderFactory {
    pub fn new() -> HeaderFactory {
        HeaderFactory {
            session: uuid::Uuid::new_v4().to_string(),
            username: "icefield".into(),
        }
    }

    pub fn header(&self, msg_type: &str) -> Map<String, Value> {
        let date = chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Micros, true);
        let header = json!({
            "msg_id": uuid::Uuid::new_v4().to_string(),
            "session": self.session,
            "username": self.username,
            "date": date,
            "msg_type": msg_type,
            "version": PROTOCOL_VERSION,
        });
        match header {
            Value::Object(map) => map,
            _ => Map::new(),
        }
    }

    /// A reply on a ROUTER socket: same identities, the request's header as parent.
    pub fn reply(&self, request: &Message, msg_type: &str, content: Value) -> Message {
        Message {
            identities: request.identities.clone(),
            header: self.header(msg_type),
            parent_header: request.header.clone(),
            metadata: Map::new(),
            content,
            buffers: Vec::new(),
        }
    }

    /// A broadcast on IOPub with `parent` as parent header. The topic is carried as the
    /// (single) identity frame, which is how PUB sockets route.
    pub fn broadcast(&self, parent: Option<&Message>, msg_type: &str, content: Value) -> Message {
        Message {
            identities: vec![format!("kernel.{}.{}", self.session, msg_type).into_bytes()],
            header: self.header(msg_type),
            parent_header: parent.map(|p| p.header.clone()).unwrap_or_default(),
            metadata: Map::new(),
            content,
            buffers: Vec::new(),
        }
    }
}

impl Default for HeaderFactory {
    fn default() -> Self {
        HeaderFactory::new()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn frames(signer: &Signer, content: &str) -> Vec<Vec<u8>> {
        let header = br#"{"msg_id":"a1","msg_type":"execute_request","session":"s","username":"u","date":"","version":"5.3"}"#.to_vec();
        let parent = b"{}".to_vec();
        let metadata = b"{}".to_vec();
        let content = content.as_bytes().to_vec();
        let sig = signer.sign([&header, &parent, &metadata, &content]);
        vec![
            b"client-id".to_vec(),
            DELIMITER.to_vec(),
            sig.into_bytes(),
            header,
            parent,
            metadata,
            content,
        ]
    }

    #[test]
    fn hmac_matches_rfc4231_test_case_2() {
        // RFC 4231, section 4.3 (2005): key "Jefe", data "what do ya want for nothing?".
        let signer = Signer::new(b"Jefe");
        let sig = signer.sign([b"what do ya ", b"want ", b"for nothing", b"?"]);
        assert_eq!(
            sig,
            "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843"
        );
    }

    #[test]
    fn round_trip_keeps_identities_and_content() {
        let signer = Signer::new(b"secret");
        let msg = Message::decode(frames(&signer, r#"{"code":"x"}"#), &signer).unwrap();
        assert_eq!(msg.identities, vec![b"client-id".to_vec()]);
        assert_eq!(msg.msg_type(), "execute_request");
        assert_eq!(msg.content["code"], "x");
        let again = Message::decode(msg.encode(&signer), &signer).unwrap();
        assert_eq!(again, msg);
    }

    #[test]
    fn wrong_key_and_missing_signature_are_refused() {
        let good = Signer::new(b"secret");
        let other = Signer::new(b"not-the-secret");
        let err = Message::decode(frames(&other, "{}"), &good).unwrap_err();
        assert_eq!(err, WireError::BadSignature);

        let mut unsigned = frames(&good, "{}");
        unsigned[2] = Vec::new();
        assert_eq!(
            Message::decode(unsigned, &good).unwrap_err(),
            WireError::MissingSignature
        );

        let mut not_hex = frames(&good, "{}");
        not_hex[2] = b"zz".to_vec();
        assert_eq!(
            Message::decode(not_hex, &good).unwrap_err(),
            WireError::BadSignature
        );

        // A correctly signed message whose content was altered afterwards.
        let mut tampered = frames(&good, r#"{"code":"a"}"#);
        tampered[6] = br#"{"code":"b"}"#.to_vec();
        assert_eq!(
            Message::decode(tampered, &good).unwrap_err(),
            WireError::BadSignature
        );
    }

    #[test]
    fn empty_key_means_no_checking() {
        let none = Signer::new(b"");
        assert!(!none.is_signing());
        let mut msg = frames(&none, "{}");
        assert!(msg[2].is_empty());
        msg[2] = b"anything".to_vec();
        assert!(Message::decode(msg, &none).is_ok());
    }

    #[test]
    fn malformed_frames_are_errors_not_panics() {
        let signer = Signer::new(b"");
        assert_eq!(
            Message::decode(vec![], &signer).unwrap_err(),
            WireError::MissingDelimiter
        );
        assert_eq!(
            Message::decode(vec![DELIMITER.to_vec(), b"".to_vec()], &signer).unwrap_err(),
            WireError::TooFewFrames(1)
        );
        let mut bad_json = frames(&signer, "{not json");
        bad_json[2] = Vec::new();
        assert!(matches!(
            Message::decode(bad_json, &signer),
            Err(WireError::BadJson {
                frame: "content",
                ..
            })
        ));
        let mut array_content = frames(&signer, "[1,2]");
        array_content[2] = Vec::new();
        assert!(matches!(
            Message::decode(array_content, &signer),
            Err(WireError::BadJson { .. })
        ));
        let no_type = vec![
            DELIMITER.to_vec(),
            Vec::new(),
            br#"{"msg_id":"x"}"#.to_vec(),
            b"{}".to_vec(),
            b"{}".to_vec(),
            b"{}".to_vec(),
        ];
        assert_eq!(
            Message::decode(no_type, &signer).unwrap_err(),
            WireError::MissingHeaderField("msg_type")
        );
    }

    #[test]
    fn reply_carries_request_header_as_parent() {
        let signer = Signer::new(b"k");
        let request = Message::decode(frames(&signer, "{}"), &signer).unwrap();
        let factory = HeaderFactory::new();
        let reply = factory.reply(&request, "execute_reply", json!({"status": "ok"}));
        assert_eq!(reply.identities, request.identities);
        assert_eq!(reply.parent_header, request.header);
        assert_eq!(reply.header["msg_type"], "execute_reply");
        assert_eq!(reply.header["version"], PROTOCOL_VERSION);
        assert_eq!(reply.header["session"], factory.session.as_str());
    }
}
