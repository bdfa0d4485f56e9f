//! Malformed messages through real gRPC: every payload of the corpus in `tests/corpus/*.bin`
//! (written by `tests/corpus/generate.py` with a fixed random key; each is broken at the protobuf wire level)
//! sent to every RPC gets INVALID_ARGUMENT, never INTERNAL, and over-size messages get
//! RESOURCE_EXHAUSTED. In the streams each bad item gets its own answer and the items after it
//! are still assessed; invalid UTF-8 in a string field names the field's path; the calls are
//! counted under their real code in the metrics.

use std::marker::PhantomData;
use std::path::PathBuf;

use prost::Message as _;
use prost::bytes::BufMut as _;
use startmargin_e2e::{
    TestServer, loopback_config, sample_night, sample_night_in_zone, vehicle_item, zone_item,
};
use startmargin_proto::v1 as pb;
use startmargin_proto::v1::assess_fleet_response::Outcome;
use startmargin_proto::v1::watch_fleet_response::Event;
use tokio_stream::StreamExt as _;
use tonic::Code;
use tonic::codec::{Codec, DecodeBuf, Decoder, EncodeBuf, Encoder};
use tonic::transport::Channel;

/// Largest message the test server decodes; the over-size items are larger.
const LIMIT_BYTES: usize = 64 * 1024;
const SERVICE: &str = "/startmargin.v1.StartMarginService/";

/// Sends raw bytes as the request messages and decodes the answers as `R`.
#[derive(Debug)]
struct RawCodec<R>(PhantomData<R>);

impl<R> Default for RawCodec<R> {
    fn default() -> Self {
        Self(PhantomData)
    }
}

#[derive(Debug)]
struct RawEncoder;

impl Encoder for RawEncoder {
    type Item = Vec<u8>;
    type Error = tonic::Status;

    fn encode(&mut self, item: Vec<u8>, dst: &mut EncodeBuf<'_>) -> Result<(), tonic::Status> {
        dst.put_slice(&item);
        Ok(())
    }
}

#[derive(Debug)]
struct MessageDecoder<R>(PhantomData<R>);

impl<R: prost::Message + Default> Decoder for MessageDecoder<R> {
    type Item = R;
    type Error = tonic::Status;

    fn decode(&mut self, src: &mut DecodeBuf<'_>) -> Result<Option<R>, tonic::Status> {
        R::decode(src)
            .map(Some)
            .map_err(|e| tonic::Status::internal(format!("answer undecodable: {e}")))
    }
}

impl<R: prost::Message + Default + Send + 'static> Codec for RawCodec<R> {
    type Encode = Vec<u8>;
    type Decode = R;
    type Encoder = RawEncoder;
    type Decoder = MessageDecoder<R>;

    fn encoder(&mut self) -> RawEncoder {
        RawEncoder
    }

    fn decoder(&mut self) -> MessageDecoder<R> {
        MessageDecoder(PhantomData)
    }
}

fn corpus() -> Vec<(String, Vec<u8>)> {
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("corpus");
    let mut files: Vec<_> = std::fs::read_dir(&dir)
        .expect("tests/corpus")
        .filter_map(Result::ok)
        .map(|e| e.path())
        .filter(|p| p.extension().is_some_and(|x| x == "bin"))
        .collect();
    files.sort();
    let corpus: Vec<_> = files
        .into_iter()
        .map(|p| {
            let name = p
                .file_name()
                .unwrap_or_default()
                .to_string_lossy()
                .to_string();
            (name, std::fs::read(&p).expect("read corpus file"))
        })
        .collect();
    assert!(corpus.len() >= 40, "the corpus is in the repository");
    corpus
}

async fn unary<R: prost::Message + Default + Send + 'static>(
    channel: &Channel,
    rpc: &str,
    raw: Vec<u8>,
) -> Result<R, tonic::Status> {
    let mut grpc = tonic::client::Grpc::new(channel.clone());
    grpc.ready().await.expect("ready");
    let path = format!("{SERVICE}{rpc}").parse().expect("path");
    grpc.unary(tonic::Request::new(raw), path, RawCodec::<R>::default())
        .await
        .map(tonic::Response::into_inner)
}

async fn streaming<R: prost::Message + Default + Send + 'static>(
    channel: &Channel,
    rpc: &str,
    items: Vec<Vec<u8>>,
) -> (Vec<R>, Result<(), tonic::Status>) {
    let mut grpc = tonic::client::Grpc::new(channel.clone());
    grpc.ready().await.expect("ready");
    let path = format!("{SERVICE}{rpc}").parse().expect("path");
    let request = tonic::Request::new(tokio_stream::iter(items));
    let mut answers = Vec::new();
    let mut stream = match grpc
        .streaming(request, path, RawCodec::<R>::default())
        .await
    {
        Ok(response) => response.into_inner(),
        Err(status) => return (answers, Err(status)),
    };
    loop {
        match stream.next().await {
            Some(Ok(answer)) => answers.push(answer),
            Some(Err(status)) => return (answers, Err(status)),
            None => return (answers, Ok(())),
        }
    }
}

/// `message` encoded, with the bytes of `marker` (which it must contain) made invalid UTF-8.
fn with_invalid_utf8(message: &impl prost::Message, marker: &str) -> Vec<u8> {
    let mut raw = message.encode_to_vec();
    let at = raw
        .windows(marker.len())
        .position(|w| w == marker.as_bytes())
        .expect("marker in the encoding");
    raw[at..at + marker.len()].fill(0xff);
    raw
}

fn fleet_error(
    answer: &pb::AssessFleetResponse,
) -> Option<&startmargin_proto::google::rpc::Status> {
    match &answer.outcome {
        Some(Outcome::Error(e)) => Some(e),
        _ => None,
    }
}

#[tokio::test]
async fn every_rpc_refuses_the_corpus_with_invalid_argument() {
    let config = startmargin_service::Config {
        max_decode_message_bytes: LIMIT_BYTES,
        ..loopback_config()
    };
    let server = TestServer::start_with(config).await.expect("server");
    let corpus = corpus();
    for (name, raw) in &corpus {
        let vehicle =
            unary::<pb::AssessVehicleResponse>(&server.channel, "AssessVehicle", raw.clone()).await;
        let code = vehicle.expect_err(name).code();
        assert_eq!(code, Code::InvalidArgument, "AssessVehicle {name}");
        let describe =
            unary::<pb::DescribeModelResponse>(&server.channel, "DescribeModel", raw.clone()).await;
        assert_eq!(
            describe.expect_err(name).code(),
            Code::InvalidArgument,
            "DescribeModel {name}"
        );
    }

    // The whole corpus on one fleet stream and one watch stream: one answer per item.
    let items: Vec<Vec<u8>> = corpus.iter().map(|(_, raw)| raw.clone()).collect();
    let (answers, end) =
        streaming::<pb::AssessFleetResponse>(&server.channel, "AssessFleet", items.clone()).await;
    end.expect("the fleet stream ends OK");
    assert_eq!(answers.len(), corpus.len());
    for answer in &answers {
        let error = fleet_error(answer).expect("an error per item");
        assert_eq!(error.code, Code::InvalidArgument as i32, "{error:?}");
        assert!(error.message.contains("cannot be decoded"), "{error:?}");
    }
    let (events, end) =
        streaming::<pb::WatchFleetResponse>(&server.channel, "WatchFleet", items).await;
    end.expect("the watch stream ends OK");
    assert_eq!(events.len(), corpus.len());
    for event in &events {
        let Some(Event::Refused(refused)) = &event.event else {
            panic!("{event:?}")
        };
        let code = refused.error.as_ref().map(|e| e.code);
        assert_eq!(code, Some(Code::InvalidArgument as i32), "{refused:?}");
    }

    // Over-size: RESOURCE_EXHAUSTED, for a unary call and for a stream item.
    let huge = vec![0u8; LIMIT_BYTES + 1];
    let vehicle =
        unary::<pb::AssessVehicleResponse>(&server.channel, "AssessVehicle", huge.clone()).await;
    assert_eq!(
        vehicle.expect_err("over-size").code(),
        Code::ResourceExhausted
    );

    // The metrics count the refused unary calls under INVALID_ARGUMENT, none under INTERNAL.
    let metrics = startmargin_service::metrics::render();
    let count = |code: &str| -> u64 {
        let key = format!("startmargin_calls_total{{rpc=\"AssessVehicle\",code=\"{code}\"}} ");
        metrics
            .lines()
            .find_map(|l| l.strip_prefix(&key))
            .and_then(|n| n.trim().parse().ok())
            .unwrap_or(0)
    };
    assert!(count("InvalidArgument") >= corpus.len() as u64, "{metrics}");
    assert_eq!(count("Internal"), 0, "{metrics}");
    server.shutdown().await.expect("shutdown");
}

#[tokio::test]
async fn a_fleet_stream_goes_on_after_bad_items() {
    let config = startmargin_service::Config {
        max_decode_message_bytes: LIMIT_BYTES,
        ..loopback_config()
    };
    let server = TestServer::start_with(config).await.expect("server");
    let good = |i: usize| {
        vehicle_item(
            &format!("item-{i}"),
            sample_night_in_zone(&format!("v{i}"), "yard"),
        )
        .encode_to_vec()
    };
    let bad_utf8 = with_invalid_utf8(
        &vehicle_item(
            "bad-utf8",
            sample_night_in_zone("MARKER-VEHICLE-ID", "yard"),
        ),
        "MARKER-VEHICLE-ID",
    );
    let corpus = corpus();
    let items = vec![
        zone_item("zone", "yard").encode_to_vec(),
        good(0),
        corpus[0].1.clone(),
        good(2),
        bad_utf8,
        good(4),
        vec![0u8; LIMIT_BYTES * 3],
        good(6),
    ];
    let (answers, end) =
        streaming::<pb::AssessFleetResponse>(&server.channel, "AssessFleet", items).await;
    end.expect("the stream ends OK");
    let assessed: Vec<&str> = answers
        .iter()
        .filter(|a| matches!(a.outcome, Some(Outcome::Assessment(_))))
        .map(|a| a.item_id.as_str())
        .collect();
    let mut sorted = assessed.clone();
    sorted.sort_unstable();
    assert_eq!(
        sorted,
        ["item-0", "item-2", "item-4", "item-6"],
        "{answers:?}"
    );

    let errors: Vec<_> = answers
        .iter()
        .filter_map(|a| fleet_error(a).map(|e| (a, e)))
        .collect();
    assert_eq!(errors.len(), 3, "{answers:?}");
    let utf8 = errors
        .iter()
        .find(|(a, _)| a.item_id == "bad-utf8")
        .expect("the item id is read from the undecodable item");
    assert_eq!(utf8.1.code, Code::InvalidArgument as i32);
    assert_eq!(
        startmargin_e2e::violated_fields_in(utf8.1),
        ["vehicle.vehicle.vehicle_id"]
    );
    assert!(utf8.1.message.contains("item 4"), "{:?}", utf8.1);
    let over_size = errors
        .iter()
        .find(|(_, e)| e.code == Code::ResourceExhausted as i32)
        .expect("the over-size item is refused on its own");
    assert!(over_size.1.message.contains("item 6"), "{:?}", over_size.1);
    server.shutdown().await.expect("shutdown");
}

#[tokio::test]
async fn invalid_utf8_in_a_unary_request_names_the_field() {
    let server = TestServer::start().await.expect("server");
    let request = pb::AssessVehicleRequest {
        night: Some(sample_night("MARKER-VEHICLE-ID")),
    };
    let raw = with_invalid_utf8(&request, "MARKER-VEHICLE-ID");
    let status = unary::<pb::AssessVehicleResponse>(&server.channel, "AssessVehicle", raw)
        .await
        .expect_err("refused");
    assert_eq!(status.code(), Code::InvalidArgument, "{status:?}");
    assert_eq!(
        startmargin_e2e::violated_fields(&status),
        ["night.vehicle.vehicle_id"]
    );
    server.shutdown().await.expect("shutdown");
}
