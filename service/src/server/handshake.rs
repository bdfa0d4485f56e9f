//! A deadline on the start of every accepted connection: a peer that opens a TCP connection and
//! does not send the 24-byte HTTP/2 client preface (plaintext) or its first TLS bytes within
//! `handshake_timeout_s` has its connection closed. Without it a silent peer holds a file
//! descriptor forever (neither hyper nor h2 time out the preface), and a few hundred of them make
//! the server unreachable at a usual fd limit.
//!
//! With TLS the rustls handshake itself is bounded by the same timeout in the TLS acceptor; this
//! wrapper sits below TLS, so there it bounds the wait for the first ClientHello bytes. Once the
//! HTTP/2 connection is up, the HTTP/2 keepalive pings reap dead peers.

use std::io;
use std::pin::Pin;
use std::task::{Context, Poll, ready};
use std::time::Duration;

use tokio::io::{AsyncRead, AsyncWrite, ReadBuf};
use tokio::net::TcpStream;
use tokio::time::Sleep;
use tonic::transport::server::{Connected, TcpConnectInfo};

/// Length of the HTTP/2 client connection preface (RFC 9113 §3.4).
pub const HTTP2_PREFACE_BYTES: usize = 24;

/// A TCP stream that fails with `TimedOut` if fewer than [`HTTP2_PREFACE_BYTES`] bytes arrive
/// before its deadline; after that it is the plain stream.
#[derive(Debug)]
pub struct HandshakeDeadline {
    inner: TcpStream,
    /// Bytes still to be read before the deadline is lifted.
    awaited_bytes: usize,
    deadline: Option<Pin<Box<Sleep>>>,
}

impl HandshakeDeadline {
    /// Wraps a freshly accepted stream; the deadline runs from now.
    pub fn new(inner: TcpStream, timeout: Duration) -> Self {
        Self {
            inner,
            awaited_bytes: HTTP2_PREFACE_BYTES,
            deadline: Some(Box::pin(tokio::time::sleep(timeout))),
        }
    }
}

impl AsyncRead for HandshakeDeadline {
    fn poll_read(
        mut self: Pin<&mut Self>,
        cx: &mut Context<'_>,
        buf: &mut ReadBuf<'_>,
    ) -> Poll<io::Result<()>> {
        if let Some(deadline) = self.deadline.as_mut()
            && deadline.as_mut().poll(cx).is_ready()
        {
            return Poll::Ready(Err(io::Error::new(
                io::ErrorKind::TimedOut,
                "no handshake within the handshake timeout",
            )));
        }
        let before = buf.filled().len();
        ready!(Pin::new(&mut self.inner).poll_read(cx, buf))?;
        let read = buf.filled().len() - before;
        if self.deadline.is_some() {
            self.awaited_bytes = self.awaited_bytes.saturating_sub(read);
            if self.awaited_bytes == 0 {
                self.deadline = None;
            }
        }
        Poll::Ready(Ok(()))
    }
}

impl AsyncWrite for HandshakeDeadline {
    fn poll_write(
        mut self: Pin<&mut Self>,
        cx: &mut Context<'_>,
        buf: &[u8],
    ) -> Poll<io::Result<usize>> {
        Pin::new(&mut self.inner).poll_write(cx, buf)
    }

    fn poll_flush(mut self: Pin<&mut Self>, cx: &mut Context<'_>) -> Poll<io::Result<()>> {
        Pin::new(&mut self.inner).poll_flush(cx)
    }

    fn poll_shutdown(mut self: Pin<&mut Self>, cx: &mut Context<'_>) -> Poll<io::Result<()>> {
        Pin::new(&mut self.inner).poll_shutdown(cx)
    }

    fn poll_write_vectored(
        mut self: Pin<&mut Self>,
        cx: &mut Context<'_>,
        bufs: &[io::IoSlice<'_>],
    ) -> Poll<io::Result<usize>> {
        Pin::new(&mut self.inner).poll_write_vectored(cx, bufs)
    }

    fn is_write_vectored(&self) -> bool {
        self.inner.is_write_vectored()
    }
}

impl Connected for HandshakeDeadline {
    type ConnectInfo = TcpConnectInfo;

    fn connect_info(&self) -> Self::ConnectInfo {
        self.inner.connect_info()
    }
}
