"""A Python client generated from the API protos uses the standard google.rpc packages.

Run by CI with the venv that has the pinned grpcio-tools and googleapis-common-protos:
  .ci/tools/venv/bin/python proto/tests/python_client.py
Checks, each printed, then a closing count:
  - vendor/googleapis/google/rpc/*.proto are byte for byte the files of the installed
    googleapis-common-protos package (SHA-256);
  - generating every .proto of the API root (proto/, without vendor/) writes no google/ module;
  - the generated stubs import google.rpc.status_pb2 from the installed package, and the
    per-item error of AssessFleetResponse is that package's google.rpc.Status, which carries a
    google.rpc.BadRequest from the same package.
"""

import hashlib
import importlib
import pathlib
import sys
import tempfile

from grpc_tools import protoc

PROTO_ROOT = pathlib.Path(__file__).resolve().parent.parent
VENDOR = PROTO_ROOT / "vendor" / "googleapis"
results = []


def check(name, ok, detail=""):
    results.append(ok)
    print(f"{'ok  ' if ok else 'FAIL'} {name}{': ' + detail if detail and not ok else ''}")


def sha256(path):
    return hashlib.sha256(path.read_bytes()).hexdigest()


import google.rpc.status_pb2 as standard_status  # noqa: E402  (the package under test)

site = pathlib.Path(standard_status.__file__).resolve().parent.parent.parent
for name in ("status.proto", "error_details.proto"):
    ours = VENDOR / "google" / "rpc" / name
    theirs = site / "google" / "rpc" / name
    check(
        f"vendored google/rpc/{name} has the package's SHA-256 {sha256(theirs)[:16]}…",
        ours.is_file() and theirs.is_file() and sha256(ours) == sha256(theirs),
        f"ours {sha256(ours) if ours.is_file() else 'missing'}",
    )

api_files = sorted(
    str(p.relative_to(PROTO_ROOT))
    for p in PROTO_ROOT.rglob("*.proto")
    if VENDOR not in p.parents
)
check("the API root holds only startmargin/ protos", all(f.startswith("startmargin/") for f in api_files), str(api_files))

out = pathlib.Path(tempfile.mkdtemp(prefix="startmargin-py-"))
grpc_include = pathlib.Path(protoc.__file__).resolve().parent / "_proto"
code = protoc.main(
    [
        "grpc_tools.protoc",
        f"-I{PROTO_ROOT}",
        f"-I{site}",
        f"-I{grpc_include}",
        f"--python_out={out}",
        f"--grpc_python_out={out}",
        *api_files,
    ]
)
check("grpc_tools.protoc generates the API", code == 0, f"exit {code}")
check("no local google/ module is generated", not (out / "google").exists())

sys.path.insert(0, str(out))
service_pb2 = importlib.import_module("startmargin.v1.service_pb2")
importlib.import_module("startmargin.v1.service_pb2_grpc")
import google.rpc.status_pb2 as status_after  # noqa: E402
import google.rpc.error_details_pb2 as details  # noqa: E402

check(
    "google.rpc.status_pb2 comes from googleapis-common-protos",
    pathlib.Path(status_after.__file__).resolve().is_relative_to(site)
    and status_after is standard_status,
    status_after.__file__,
)
error_field = service_pb2.AssessFleetResponse.DESCRIPTOR.fields_by_name["error"]
check(
    "AssessFleetResponse.error is the standard google.rpc.Status",
    error_field.message_type is standard_status.Status.DESCRIPTOR,
)
bad = details.BadRequest(
    field_violations=[
        details.BadRequest.FieldViolation(field="night.vehicle.battery.capacity_cca", description="out of range")
    ]
)
response = service_pb2.AssessFleetResponse(item_id="item-1", vehicle_id="truck-1")
response.error.code = 3
response.error.details.add().Pack(bad)
back = service_pb2.AssessFleetResponse.FromString(response.SerializeToString())
unpacked = details.BadRequest()
check(
    "a BadRequest detail round-trips through the generated message",
    back.error.details[0].Unpack(unpacked)
    and unpacked.field_violations[0].field == "night.vehicle.battery.capacity_cca",
)

# The demos' JSON lines are canonical proto3 JSON: Google's own json_format reads the reference
# lines (written by the Rust tests in demo-clients/tests/json_lines.rs) into the generated messages
# and prints them back to the same JSON.
import json  # noqa: E402

from google.protobuf import json_format  # noqa: E402

watch_pb2 = importlib.import_module("startmargin.v1.watch_pb2")
data = PROTO_ROOT.parent / "demo-clients" / "tests" / "data"
for name, message_type in (
    ("fleet_responses.jsonl", service_pb2.AssessFleetResponse),
    ("alerts.jsonl", watch_pb2.Alert),
):
    lines = (data / name).read_text().splitlines()
    for i, line in enumerate(lines):
        try:
            message = json_format.Parse(line, message_type())
            again = json_format.MessageToDict(message)
            check(f"{name} line {i + 1} parses and prints back the same", again == json.loads(line), json.dumps(again))
        except json_format.ParseError as e:
            check(f"{name} line {i + 1} parses", False, str(e))
    check(f"{name} has lines", len(lines) > 0)

passed = sum(results)
failed = len(results) - passed
print(f"python-client: {passed} passed, {failed} failed")
sys.exit(1 if failed else 0)
