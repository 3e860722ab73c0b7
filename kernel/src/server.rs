//! The running kernel: binds the five ZeroMQ sockets and serves them from threads.
//!
//! - heartbeat (REP): echoes every message, on its own thread, so the front end sees
//!   the kernel alive even while a cell computes;
//! - control (ROUTER): its own thread, so `interrupt_request` and `shutdown_request`
//!   are answered while a long cell runs;
//! - shell (ROUTER): the thread that owns the language session and runs cells;
//! - iopub (PUB): one publisher thread fed by a channel, because a ZeroMQ socket must
//!   not be shared between threads and both shell and control broadcast status;
//! - stdin (ROUTER): bound as the spec requires; icefield never asks for input.

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc;
use std::sync::Arc;
use std::thread::{self, JoinHandle};
use std::time::{Duration, Instant};

use icefield_lang::Interrupt;
use serde_json::Value;

use crate::connection::{Channel, ConnectionInfo};
use crate::dispatch::{self, Flow, Kernel, Outlet};
use crate::wire::{HeaderFactory, Message, Signer};

/// How often blocking loops wake to check for shutdown.
const POLL_MS: i64 = 100;
/// How long a closing socket may keep trying to deliver queued messages.
const LINGER_MS: i32 = 1000;
/// How long shutdown waits for a running cell to stop at the interrupt.
const SHELL_GRACE: Duration = Duration::from_secs(5);

fn log(text: &str) {
    eprintln!("[icefield kernel] {text}");
}

/// Binds all sockets and serves until a `shutdown_request`.
pub fn serve(info: &ConnectionInfo, interrupt: Interrupt) -> Result<(), String> {
    let context = zmq::Context::new();
    let bind = |kind: zmq::SocketType, channel: Channel| -> Result<zmq::Socket, String> {
        let socket = context
            .socket(kind)
            .map_err(|e| format!("cannot create socket: {e}"))?;
        socket.set_linger(LINGER_MS).map_err(|e| e.to_string())?;
        let endpoint = info.endpoint(channel);
        socket
            .bind(&endpoint)
            .map_err(|e| format!("cannot bind {channel:?} to {endpoint}: {e}"))?;
        Ok(socket)
    };
    let shell = bind(zmq::ROUTER, Channel::Shell)?;
    let control = bind(zmq::ROUTER, Channel::Control)?;
    let stdin = bind(zmq::ROUTER, Channel::Stdin)?;
    let iopub = bind(zmq::PUB, Channel::Iopub)?;
    let heartbeat = bind(zmq::REP, Channel::Heartbeat)?;

    log(&format!(
        "icefield {} listening: shell {}, control {}, iopub {}, stdin {}, heartbeat {}",
        dispatch::KERNEL_VERSION,
        info.endpoint(Channel::Shell),
        info.endpoint(Channel::Control),
        info.endpoint(Channel::Iopub),
        info.endpoint(Channel::Stdin),
        info.endpoint(Channel::Heartbeat),
    ));
    let signer = Signer::new(info.key.as_bytes());
    if !signer.is_signing() {
        log("connection key is empty: messages are neither signed nor checked");
    }
    let headers = HeaderFactory::new();
    let stop = Arc::new(AtomicBool::new(false));
    let (iopub_tx, iopub_rx) = mpsc::channel::<Message>();

    let iopub_thread = spawn("iopub", {
        let signer = signer.clone();
        move || publish_loop(iopub, iopub_rx, signer)
    })?;
    let heartbeat_thread = spawn("heartbeat", {
        let stop = stop.clone();
        move || heartbeat_loop(heartbeat, stop)
    })?;
    let control_thread = spawn("control", {
        let endpoint = Endpoint::new(control, iopub_tx.clone(), signer.clone(), headers.clone());
        let (stop, interrupt) = (stop.clone(), interrupt.clone());
        move || control_loop(endpoint, interrupt, stop)
    })?;
    let shell_thread = spawn("shell", {
        let endpoint = Endpoint::new(shell, iopub_tx.clone(), signer, headers);
        let stop = stop.clone();
        move || {
            // The session is created on the thread that uses it.
            let kernel = Kernel::new(icefield_lang::Session::new(), interrupt);
            shell_loop(endpoint, kernel, stop)
        }
    })?;
    drop(iopub_tx);

    let _ = control_thread.join();
    // Also reached when the shell thread saw a shutdown_request.
    stop.store(true, Ordering::SeqCst);
    let deadline = Instant::now() + SHELL_GRACE;
    while !shell_thread.is_finished() && Instant::now() < deadline {
        thread::sleep(Duration::from_millis(20));
    }
    let _ = heartbeat_thread.join();
    if !shell_thread.is_finished() {
        // The running cell ignored the interrupt. The shutdown reply has been handed to
        // ZeroMQ; give its I/O thread a moment to deliver it, then leave.
        log("a running cell did not stop at the interrupt; exiting without waiting for it");
        thread::sleep(Duration::from_millis(300));
        std::process::exit(0);
    }
    let _ = shell_thread.join();
    let _ = iopub_thread.join();
    drop(stdin);
    Ok(())
}

fn spawn<F>(name: &str, body: F) -> Result<JoinHandle<()>, String>
where
    F: FnOnce() + Send + 'static,
{
    thread::Builder::new()
        .name(format!("icefield-{name}"))
        .spawn(body)
        .map_err(|e| format!("cannot start the {name} thread: {e}"))
}

/// A ROUTER socket plus the way to broadcast: what the dispatch layer's `Outlet` needs.
struct Endpoint {
    socket: zmq::Socket,
    iopub: mpsc::Sender<Message>,
    signer: Signer,
    headers: HeaderFactory,
}

impl Endpoint {
    fn new(
        socket: zmq::Socket,
        iopub: mpsc::Sender<Message>,
        signer: Signer,
        headers: HeaderFactory,
    ) -> Endpoint {
        Endpoint {
            socket,
            iopub,
            signer,
            headers,
        }
    }

    /// Waits up to `timeout_ms` for one message. Bad frames and bad signatures are
    /// logged and dropped here, so nothing above ever sees them.
    fn receive(&self, timeout_ms: i64) -> Received {
        match self.socket.poll(zmq::POLLIN, timeout_ms) {
            Ok(n) if n > 0 => {}
            _ => return Received::Nothing,
        }
        let frames = match self.socket.recv_multipart(zmq::DONTWAIT) {
            Ok(frames) => frames,
            Err(zmq::Error::EAGAIN) => return Received::Nothing,
            Err(e) => {
                log(&format!("receive failed: {e}"));
                return Received::Nothing;
            }
        };
        match Message::decode(frames, &self.signer) {
            Ok(msg) => Received::Message(msg),
            Err(e) => {
                log(&format!("dropped an incoming message: {e}"));
                Received::Dropped
            }
        }
    }
}

enum Received {
    Message(Message),
    /// Something arrived but was refused (bad frames or signature).
    Dropped,
    /// Nothing arrived in time.
    Nothing,
}

impl Outlet for Endpoint {
    fn reply(&mut self, request: &Message, msg_type: &str, content: Value) {
        let reply = self.headers.reply(request, msg_type, content);
        if let Err(e) = self.socket.send_multipart(reply.encode(&self.signer), 0) {
            log(&format!("cannot send {msg_type}: {e}"));
        }
    }

    fn publish(&mut self, parent: &Message, msg_type: &str, content: Value) {
        let msg = self.headers.broadcast(Some(parent), msg_type, content);
        if self.iopub.send(msg).is_err() {
            log(&format!("iopub is closed; {msg_type} not sent"));
        }
    }
}

fn publish_loop(socket: zmq::Socket, queue: mpsc::Receiver<Message>, signer: Signer) {
    // Ends when every sender (shell and control endpoints) is gone.
    for msg in queue {
        if let Err(e) = socket.send_multipart(msg.encode(&signer), 0) {
            log(&format!("cannot publish {}: {e}", msg.msg_type()));
        }
    }
}

fn heartbeat_loop(socket: zmq::Socket, stop: Arc<AtomicBool>) {
    while !stop.load(Ordering::SeqCst) {
        match socket.poll(zmq::POLLIN, POLL_MS) {
            Ok(n) if n > 0 => {}
            _ => continue,
        }
        match socket.recv_multipart(zmq::DONTWAIT) {
            Ok(frames) => {
                if let Err(e) = socket.send_multipart(frames, 0) {
                    log(&format!("heartbeat echo failed: {e}"));
                }
            }
            Err(zmq::Error::EAGAIN) => {}
            Err(e) => log(&format!("heartbeat receive failed: {e}")),
        }
    }
}

fn control_loop(mut endpoint: Endpoint, interrupt: Interrupt, stop: Arc<AtomicBool>) {
    while !stop.load(Ordering::SeqCst) {
        let Received::Message(msg) = endpoint.receive(POLL_MS) else {
            continue;
        };
        if let Flow::Shutdown { restart } =
            dispatch::handle_control(&msg, &interrupt, &mut endpoint)
        {
            log(if restart {
                "shutting down for a restart"
            } else {
                "shutting down"
            });
            stop.store(true, Ordering::SeqCst);
        }
    }
}

fn shell_loop<L: dispatch::Language>(
    mut endpoint: Endpoint,
    mut kernel: Kernel<L>,
    stop: Arc<AtomicBool>,
) {
    while !stop.load(Ordering::SeqCst) {
        let Received::Message(msg) = endpoint.receive(POLL_MS) else {
            continue;
        };
        match kernel.handle_shell(&msg, &mut endpoint) {
            Flow::Continue => {}
            Flow::AbortQueued => {
                if abort_queued(&mut endpoint, &mut kernel) {
                    stop.store(true, Ordering::SeqCst);
                }
            }
            Flow::Shutdown { .. } => stop.store(true, Ordering::SeqCst),
        }
    }
}

/// After a failed cell with `stop_on_error`: every execute request already waiting on
/// the shell socket is answered "aborted"; other requests queued meanwhile (completion,
/// inspection, kernel info) are still served normally. Returns true if one of them was
/// a shutdown request.
fn abort_queued<L: dispatch::Language>(endpoint: &mut Endpoint, kernel: &mut Kernel<L>) -> bool {
    loop {
        let msg = match endpoint.receive(0) {
            Received::Message(msg) => msg,
            Received::Dropped => continue,
            Received::Nothing => return false,
        };
        if msg.msg_type() == "execute_request" {
            kernel.abort(&msg, endpoint);
        } else if let Flow::Shutdown { .. } = kernel.handle_shell(&msg, endpoint) {
            return true;
        }
    }
}

#[cfg(test)]
mod tests {
    //! The real server over real sockets on loopback: a signed request is answered, a
    //! forged one is dropped, the heartbeat echoes, and shutdown ends `serve`.

    use super::*;
    use serde_json::{json, Map};

    fn free_port() -> u16 {
        std::net::TcpListener::bind("127.0.0.1:0")
            .and_then(|l| l.local_addr())
            .map(|a| a.port())
            .unwrap()
    }

    fn request(signer: &Signer, msg_type: &str, content: Value) -> Vec<Vec<u8>> {
        let client = HeaderFactory::new();
        Message {
            identities: vec![],
            header: client.header(msg_type),
            parent_header: Map::new(),
            metadata: Map::new(),
            content,
            buffers: vec![],
        }
        .encode(signer)
    }

    fn receive(socket: &zmq::Socket, signer: &Signer, timeout_ms: i64) -> Option<Message> {
        if socket.poll(zmq::POLLIN, timeout_ms).ok()? == 0 {
            return None;
        }
        let frames = socket.recv_multipart(0).ok()?;
        Some(Message::decode(frames, signer).expect("the kernel signs its messages"))
    }

    #[test]
    fn serves_signed_requests_and_drops_forged_ones() {
        let info = ConnectionInfo {
            transport: "tcp".into(),
            ip: "127.0.0.1".into(),
            shell_port: free_port(),
            iopub_port: free_port(),
            stdin_port: free_port(),
            control_port: free_port(),
            hb_port: free_port(),
            key: "test-key".into(),
            signature_scheme: "hmac-sha256".into(),
            kernel_name: "icefield".into(),
        };
        let server = {
            let info = info.clone();
            thread::spawn(move || serve(&info, Interrupt::new()))
        };
        let context = zmq::Context::new();
        let connect = |kind, channel| {
            let socket = context.socket(kind).unwrap();
            socket.set_linger(0).unwrap();
            socket.connect(&info.endpoint(channel)).unwrap();
            socket
        };
        let shell = connect(zmq::DEALER, Channel::Shell);
        let control = connect(zmq::DEALER, Channel::Control);
        let heartbeat = connect(zmq::REQ, Channel::Heartbeat);
        let signer = Signer::new(b"test-key");

        // A forged request first: it must produce nothing, not even a reply.
        shell
            .send_multipart(
                request(&Signer::new(b"wrong"), "kernel_info_request", json!({})),
                0,
            )
            .unwrap();
        assert!(receive(&shell, &signer, 500).is_none());

        shell
            .send_multipart(request(&signer, "kernel_info_request", json!({})), 0)
            .unwrap();
        let reply = receive(&shell, &signer, 10_000).expect("kernel_info_reply");
        assert_eq!(reply.msg_type(), "kernel_info_reply");
        assert_eq!(reply.content["language_info"]["name"], "icefield");

        heartbeat.send("ping", 0).unwrap();
        assert_eq!(heartbeat.poll(zmq::POLLIN, 10_000).unwrap(), 1);
        assert_eq!(heartbeat.recv_bytes(0).unwrap(), b"ping");

        control
            .send_multipart(
                request(&signer, "shutdown_request", json!({"restart": false})),
                0,
            )
            .unwrap();
        let reply = receive(&control, &signer, 10_000).expect("shutdown_reply");
        assert_eq!(reply.content, json!({"status": "ok", "restart": false}));
        assert_eq!(server.join().unwrap(), Ok(()));
    }
}
