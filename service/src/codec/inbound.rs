//! The request side of a call, read message by message from the HTTP/2 body with the gRPC
//! length-prefixed framing (1 flag byte, 4-byte big-endian length, the message).
//!
//! Unlike tonic's `Streaming`, whose first decode error or over-size message ends the call, this
//! reader keeps going wherever the framing allows: an undecodable message becomes a
//! [`BadItem`] (INVALID_ARGUMENT) and the next message is read; a message longer than the limit
//! is skipped as its bytes arrive, never buffered, and becomes a RESOURCE_EXHAUSTED
//! [`BadItem`]; input that ends inside a message is one last [`BadItem`]. Only a failure of the
//! connection itself (the client reset the call) ends the reading with a status.
//!
//! It reads only when the handler asks for the next message, so the HTTP/2 flow-control window
//! (see `crate::server`) is what holds a fast client back.

use std::marker::PhantomData;
use std::pin::Pin;

use http_body::Body as _;
use prost::Message;
use prost::bytes::{Buf as _, BytesMut};
use tonic::Status;

use super::decode::{self, BadItem, ItemKind};

/// Bytes of the gRPC message prefix: compressed flag and length.
const PREFIX_BYTES: usize = 5;

/// The messages of one call's request body.
pub struct Inbound<T> {
    body: tonic::body::Body,
    buf: BytesMut,
    max_message_bytes: usize,
    kind: ItemKind,
    /// Index of the next message.
    index: u64,
    /// Bytes of a skipped over-size message still to discard.
    skip_bytes: usize,
    ended: bool,
    _message: PhantomData<fn() -> T>,
}

impl<T> std::fmt::Debug for Inbound<T> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Inbound")
            .field("index", &self.index)
            .field("buffered_bytes", &self.buf.len())
            .field("ended", &self.ended)
            .finish_non_exhaustive()
    }
}

impl<T: Message + Default> Inbound<T> {
    /// Reads `body`; messages longer than `max_message_bytes` are refused.
    pub fn new(body: tonic::body::Body, max_message_bytes: usize, kind: ItemKind) -> Self {
        Self {
            body,
            buf: BytesMut::new(),
            max_message_bytes,
            kind,
            index: 0,
            skip_bytes: 0,
            ended: false,
            _message: PhantomData,
        }
    }

    /// The next message: `Ok(Some(Ok(request)))`, `Ok(Some(Err(bad)))` for a message that
    /// cannot be used (the next one can still be read), `Ok(None)` at the end of the input, and
    /// `Err(status)` when the call itself failed (nothing more can be read).
    pub async fn message(&mut self) -> Result<Option<Result<T, BadItem>>, Status> {
        loop {
            if let Some(item) = self.next_buffered() {
                return Ok(Some(item));
            }
            if self.ended {
                if self.buf.is_empty() && self.skip_bytes == 0 {
                    return Ok(None);
                }
                let index = self.take_index();
                self.buf.clear();
                self.skip_bytes = 0;
                return Ok(Some(Err(decode::unreadable(
                    index,
                    "the input ended inside the message",
                    self.kind,
                ))));
            }
            self.read_more().await?;
        }
    }

    /// A complete message (or a refusal) from what is buffered, if there is one.
    fn next_buffered(&mut self) -> Option<Result<T, BadItem>> {
        if self.skip_bytes > 0 {
            self.discard_skipped();
            if self.skip_bytes > 0 {
                return None;
            }
        }
        if self.buf.len() < PREFIX_BYTES {
            return None;
        }
        let flag = self.buf[0];
        let len_bytes = [self.buf[1], self.buf[2], self.buf[3], self.buf[4]];
        let len = u32::from_be_bytes(len_bytes) as usize;
        if len > self.max_message_bytes {
            self.buf.advance(PREFIX_BYTES);
            self.skip_bytes = len;
            let index = self.take_index();
            // Discard what is already here; the rest is discarded as it arrives.
            self.discard_skipped();
            return Some(Err(decode::too_large(
                index,
                len,
                self.max_message_bytes,
                self.kind,
            )));
        }
        if self.buf.len() < PREFIX_BYTES + len {
            // Room for the whole message at once, so the rest arrives without reallocations.
            self.buf.reserve(PREFIX_BYTES + len - self.buf.len());
            return None;
        }
        self.buf.advance(PREFIX_BYTES);
        let raw = self.buf.split_to(len).freeze();
        let index = self.take_index();
        if flag != 0 {
            return Some(Err(decode::unreadable(
                index,
                "the message is marked compressed, but no grpc-encoding is accepted",
                self.kind,
            )));
        }
        Some(decode::decode(raw, index, self.kind))
    }

    /// Drops the buffered bytes of a skipped message.
    fn discard_skipped(&mut self) {
        let n = self.skip_bytes.min(self.buf.len());
        self.buf.advance(n);
        self.skip_bytes -= n;
    }

    fn take_index(&mut self) -> u64 {
        let index = self.index;
        self.index += 1;
        index
    }

    /// Waits for the next data of the body; sets `ended` at its end.
    async fn read_more(&mut self) -> Result<(), Status> {
        let frame = std::future::poll_fn(|cx| Pin::new(&mut self.body).poll_frame(cx)).await;
        match frame {
            None => self.ended = true,
            Some(Ok(frame)) => {
                if let Ok(mut data) = frame.into_data() {
                    if self.skip_bytes > 0 && self.buf.is_empty() {
                        // Skipped bytes are dropped here, never copied.
                        let n = self.skip_bytes.min(data.len());
                        data.advance(n);
                        self.skip_bytes -= n;
                    }
                    self.buf.extend_from_slice(&data);
                }
                // Request trailers carry nothing for these calls.
            }
            Some(Err(e)) => return Err(Status::from_error(e.into())),
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use startmargin_proto::v1 as pb;

    fn frame(flag: u8, payload: &[u8]) -> Vec<u8> {
        let mut f = vec![flag];
        f.extend_from_slice(&(payload.len() as u32).to_be_bytes());
        f.extend_from_slice(payload);
        f
    }

    fn inbound(bytes: Vec<u8>, limit: usize) -> Inbound<pb::AssessFleetRequest> {
        let body = tonic::body::Body::new(http_body_full(bytes));
        Inbound::new(
            body,
            limit,
            ItemKind {
                top_path: "item",
                in_stream: true,
            },
        )
    }

    fn http_body_full(
        bytes: Vec<u8>,
    ) -> impl http_body::Body<Data = prost::bytes::Bytes, Error = Status> {
        // A body of one data frame per 7 bytes, so messages arrive split across frames.
        let chunks: Vec<_> = bytes
            .chunks(7)
            .map(|c| {
                Ok(http_body::Frame::data(
                    prost::bytes::Bytes::copy_from_slice(c),
                ))
            })
            .collect();
        StreamBody(chunks.into_iter())
    }

    struct StreamBody<I>(I);

    impl<I> http_body::Body for StreamBody<I>
    where
        I: Iterator<Item = Result<http_body::Frame<prost::bytes::Bytes>, Status>> + Unpin,
    {
        type Data = prost::bytes::Bytes;
        type Error = Status;

        fn poll_frame(
            mut self: Pin<&mut Self>,
            _cx: &mut std::task::Context<'_>,
        ) -> std::task::Poll<Option<Result<http_body::Frame<Self::Data>, Self::Error>>> {
            std::task::Poll::Ready(self.0.next())
        }
    }

    fn item(id: &str) -> Vec<u8> {
        pb::AssessFleetRequest {
            item_id: id.to_string(),
            item: None,
        }
        .encode_to_vec()
    }

    #[tokio::test]
    async fn bad_items_do_not_end_the_input() {
        let mut bytes = frame(0, &item("a"));
        bytes.extend(frame(0, &[0xff, 0xff, 0xff]));
        bytes.extend(frame(0, &vec![0x1a; 300])); // over the limit below
        bytes.extend(frame(1, &item("c")));
        bytes.extend(frame(0, &item("d")));
        bytes.extend(&frame(0, &item("truncated"))[..8]);
        let mut input = inbound(bytes, 64);
        let mut seen = Vec::new();
        while let Some(next) = input.message().await.expect("no call error") {
            seen.push(match next {
                Ok(request) => format!("ok {}", request.item_id),
                Err(bad) => format!("bad {} {:?}", bad.index, bad.error.code()),
            });
        }
        assert_eq!(
            seen,
            [
                "ok a",
                "bad 1 InvalidArgument",
                "bad 2 ResourceExhausted",
                "bad 3 InvalidArgument",
                "ok d",
                "bad 5 InvalidArgument",
            ]
        );
    }
}
