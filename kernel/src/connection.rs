//! The connection file a Jupyter front end writes before starting the kernel
//! (Jupyter client documentation, "Connection files").

use std::fmt;
use std::path::Path;

use serde::{Deserialize, Serialize};

#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ConnectionInfo {
    #[serde(default = "default_transport")]
    pub transport: String,
    #[serde(default = "default_ip")]
    pub ip: String,
    pub shell_port: u16,
    pub iopub_port: u16,
    pub stdin_port: u16,
    pub control_port: u16,
    pub hb_port: u16,
    #[serde(default)]
    pub key: String,
    #[serde(default = "default_scheme")]
    pub signature_scheme: String,
    #[serde(default)]
    pub kernel_name: String,
}

fn default_transport() -> String {
    "tcp".into()
}
fn default_ip() -> String {
    "127.0.0.1".into()
}
fn default_scheme() -> String {
    "hmac-sha256".into()
}

#[derive(Debug)]
pub enum ConnectionError {
    Read { path: String, reason: String },
    Parse { path: String, reason: String },
    Unsupported(String),
}

impl fmt::Display for ConnectionError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ConnectionError::Read { path, reason } => {
                write!(f, "cannot read connection file {path}: {reason}")
            }
            ConnectionError::Parse { path, reason } => {
                write!(f, "connection file {path} is not valid: {reason}")
            }
            ConnectionError::Unsupported(what) => {
                write!(f, "unsupported connection setting: {what}")
            }
        }
    }
}

impl std::error::Error for ConnectionError {}

/// The five channels, in the order ports appear in the spec.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Channel {
    Shell,
    Iopub,
    Stdin,
    Control,
    Heartbeat,
}

impl ConnectionInfo {
    pub fn from_file(path: &Path) -> Result<ConnectionInfo, ConnectionError> {
        let shown = path.display().to_string();
        let text = std::fs::read_to_string(path).map_err(|e| ConnectionError::Read {
            path: shown.clone(),
            reason: e.to_string(),
        })?;
        ConnectionInfo::from_json(&text)
            .map_err(|reason| ConnectionError::Parse {
                path: shown,
                reason,
            })
            .and_then(|info| info.check().map(|()| info))
    }

    pub fn from_json(text: &str) -> Result<ConnectionInfo, String> {
        serde_json::from_str(text).map_err(|e| e.to_string())
    }

    /// Only what we can honour: HMAC-SHA256 (or an empty key), TCP or IPC transport.
    pub fn check(&self) -> Result<(), ConnectionError> {
        if !self.key.is_empty() && self.signature_scheme != "hmac-sha256" {
            return Err(ConnectionError::Unsupported(format!(
                "signature_scheme \"{}\" (only \"hmac-sha256\")",
                self.signature_scheme
            )));
        }
        if self.transport != "tcp" && self.transport != "ipc" {
            return Err(ConnectionError::Unsupported(format!(
                "transport \"{}\" (only \"tcp\" or \"ipc\")",
                self.transport
            )));
        }
        Ok(())
    }

    pub fn port(&self, channel: Channel) -> u16 {
        match channel {
            Channel::Shell => self.shell_port,
            Channel::Iopub => self.iopub_port,
            Channel::Stdin => self.stdin_port,
            Channel::Control => self.control_port,
            Channel::Heartbeat => self.hb_port,
        }
    }

    /// The ZeroMQ endpoint to bind. TCP: `tcp://ip:port`; IPC: `ipc://ip-port`, the
    /// file-name convention jupyter_client uses for the ipc transport.
    pub fn endpoint(&self, channel: Channel) -> String {
        let port = self.port(channel);
        match self.transport.as_str() {
            "ipc" => format!("ipc://{}-{}", self.ip, port),
            _ => format!("tcp://{}:{}", self.ip, port),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Field set as written by jupyter_client's `write_connection_file` (common practice).
    const SAMPLE: &str = r#"{
      "shell_port": 53794, "iopub_port": 53795, "stdin_port": 53796,
      "control_port": 53797, "hb_port": 53798, "ip": "127.0.0.1",
      "key": "a0436f6c-1916-498b-8eb9-e81ab9368e84", "transport": "tcp",
      "signature_scheme": "hmac-sha256", "kernel_name": "icefield"
    }"#;

    #[test]
    fn parses_a_typical_file() {
        let info = ConnectionInfo::from_json(SAMPLE).unwrap();
        assert_eq!(info.endpoint(Channel::Shell), "tcp://127.0.0.1:53794");
        assert_eq!(info.endpoint(Channel::Heartbeat), "tcp://127.0.0.1:53798");
        assert_eq!(info.key, "a0436f6c-1916-498b-8eb9-e81ab9368e84");
        info.check().unwrap();
    }

    #[test]
    fn ipc_endpoints_use_dash_convention() {
        let mut info = ConnectionInfo::from_json(SAMPLE).unwrap();
        info.transport = "ipc".into();
        info.ip = "/tmp/kernel-x".into();
        assert_eq!(info.endpoint(Channel::Control), "ipc:///tmp/kernel-x-53797");
    }

    #[test]
    fn missing_ports_and_bad_schemes_are_errors() {
        assert!(ConnectionInfo::from_json(r#"{"shell_port": 1}"#).is_err());
        assert!(ConnectionInfo::from_json("not json").is_err());
        let mut info = ConnectionInfo::from_json(SAMPLE).unwrap();
        info.signature_scheme = "hmac-md5".into();
        assert!(info.check().is_err());
        info.key.clear();
        assert!(
            info.check().is_ok(),
            "no key, no signing: scheme irrelevant"
        );
    }

    #[test]
    fn unreadable_file_is_a_clear_error() {
        let err = ConnectionInfo::from_file(Path::new("/nonexistent/conn.json")).unwrap_err();
        assert!(err.to_string().contains("/nonexistent/conn.json"));
    }
}
