"""A stock grpcio client for the end-to-end stream tests: generates the startmargin.v1 stubs from
proto/ with grpcio-tools into a temporary folder, then drives one AssessFleet or WatchFleet stream
of small items against a server and prints one JSON line with what came back.

Usage:
  stream_client.py fleet --target 127.0.0.1:PORT --vehicles N
  stream_client.py watch --target 127.0.0.1:PORT --vehicles N
  stream_client.py telemetry --target 127.0.0.1:PORT --vehicles N --updates M --rate PER_S

The client reads the way an ordinary application does: a generator feeds requests as fast as
grpcio takes them, and the responses are read as they come. No pacing, no custom channel options.
"""

import argparse
import atexit
import json
import os
import shutil
import sys
import tempfile
import time

import grpc
from grpc_tools import protoc

REPO = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))
PROTO_DIR = os.path.join(REPO, "proto")
FORECAST_START_S = 1_736_877_600


def generate_stubs():
    """Compiles proto/ into Python modules in a fresh folder and puts it on sys.path."""
    out = tempfile.mkdtemp(prefix="startmargin-stubs-")
    atexit.register(shutil.rmtree, out, ignore_errors=True)
    include = os.path.join(os.path.dirname(protoc.__file__), "_proto")
    files = [
        os.path.join("startmargin", "v1", name)
        for name in sorted(os.listdir(os.path.join(PROTO_DIR, "startmargin", "v1")))
        if name.endswith(".proto")
    ] + [os.path.join("google", "rpc", "status.proto")]
    args = ["protoc", f"-I{PROTO_DIR}", f"-I{include}", f"--python_out={out}", f"--grpc_python_out={out}"]
    if protoc.main(args + files) != 0:
        raise SystemExit("grpcio-tools could not compile proto/")
    sys.path.insert(0, out)


def messages():
    """All startmargin.v1 messages and enums in one namespace (the generated modules split them
    by file)."""
    import importlib
    import types

    ns = types.SimpleNamespace()
    for name in ["vehicle", "conditions", "assessment", "watch", "service"]:
        module = importlib.import_module(f"startmargin.v1.{name}_pb2")
        for key, value in vars(module).items():
            if not key.startswith("_"):
                setattr(ns, key, value)
    return ns


def ts(pb, hours):
    from google.protobuf import timestamp_pb2

    return timestamp_pb2.Timestamp(seconds=FORECAST_START_S + int(hours * 3600))


def forecast(pb):
    from google.protobuf import duration_pb2

    air_c = [2.0, 0.5, -2.5, -6.0, -9.5, -12.0, -14.0, -15.5, -16.5, -17.0, -17.5, -16.0]
    return pb.Forecast(
        start_time=ts(pb, 0),
        step=duration_pb2.Duration(seconds=3600),
        points=[pb.ForecastPoint(air_c=a, wind_mps=3.0, cloud_cover_pct=20.0) for a in air_c],
    )


def profile(pb, vehicle_id):
    return pb.VehicleProfile(
        vehicle_id=vehicle_id,
        engine=pb.EngineSpec(archetype_id="heavy-di-i6"),
        battery=pb.BatterySpec(capacity_cca=900.0, nominal_v=12.0),
        oil=pb.OilSpec(sae_grade="15W-40"),
        fuel=pb.FuelSpec(grade=pb.FUEL_GRADE_US_NO2, tank_capacity_l=400.0),
    )


def run_fleet(channel, vehicles):
    from startmargin.v1 import service_pb2_grpc as rpc

    pb = messages()

    def requests():
        yield pb.AssessFleetRequest(item_id="zone", zone_forecast=pb.ZoneForecast(zone_id="z", forecast=forecast(pb)))
        for i in range(vehicles):
            night = pb.VehicleNight(
                vehicle=profile(pb, f"v{i}"),
                telemetry=pb.VehicleTelemetry(observed_at=ts(pb, 0), coolant_c=85.0),
                forecast_zone_id="z",
                departure_time=ts(pb, 10),
            )
            yield pb.AssessFleetRequest(item_id=str(i), vehicle=night)

    sample = pb.AssessFleetRequest(
        item_id="0",
        vehicle=pb.VehicleNight(
            vehicle=profile(pb, "v0"),
            telemetry=pb.VehicleTelemetry(observed_at=ts(pb, 0), coolant_c=85.0),
            forecast_zone_id="z",
            departure_time=ts(pb, 10),
        ),
    )
    stub = rpc.StartMarginServiceStub(channel)
    answered, errors, codes = set(), 0, {}
    started = time.monotonic()
    status = "OK"
    detail = ""
    try:
        for response in stub.AssessFleet(requests()):
            which = response.WhichOneof("outcome")
            if which == "error":
                errors += 1
                codes[response.error.code] = codes.get(response.error.code, 0) + 1
            if response.item_id != "zone":
                answered.add(response.item_id)
    except grpc.RpcError as e:
        status, detail = e.code().name, e.details() or ""
    elapsed_s = time.monotonic() - started
    return {
        "rpc": "AssessFleet",
        "item_bytes": sample.ByteSize(),
        "sent": vehicles,
        "answered": len(answered),
        "item_errors": errors,
        "item_error_codes": codes,
        "status": status,
        "detail": detail,
        "elapsed_s": round(elapsed_s, 3),
        "items_per_s": round(len(answered) / elapsed_s, 1) if elapsed_s > 0 else None,
    }


def run_watch(channel, vehicles):
    from startmargin.v1 import service_pb2_grpc as rpc

    pb = wpb = messages()

    def requests():
        yield wpb.WatchFleetRequest(sequence=1, zone_forecast=wpb.WatchZoneForecast(zone_id="z", forecast=forecast(pb)))
        for i in range(vehicles):
            yield wpb.WatchFleetRequest(
                sequence=i + 2,
                vehicle=wpb.WatchedVehicle(vehicle=profile(pb, f"v{i}"), forecast_zone_id="z", departure_time=ts(pb, 10)),
            )

    stub = rpc.StartMarginServiceStub(channel)
    seen, refused, events = set(), 0, 0
    started = time.monotonic()
    status, detail = "OK", ""
    call = stub.WatchFleet(requests())
    try:
        for response in call:
            events += 1
            which = response.WhichOneof("event")
            if which == "outlook_change":
                seen.add(response.outlook_change.vehicle_id)
            elif which == "refused":
                refused += 1
                seen.add(response.refused.vehicle_id)
            if len(seen) >= vehicles:
                break
    except grpc.RpcError as e:
        status, detail = e.code().name, e.details() or ""
    elapsed_s = time.monotonic() - started
    call.cancel()
    return {
        "rpc": "WatchFleet",
        "sent": vehicles,
        "answered": len(seen),
        "refused": refused,
        "events": events,
        "status": status,
        "detail": detail,
        "elapsed_s": round(elapsed_s, 3),
        "items_per_s": round(len(seen) / elapsed_s, 1) if elapsed_s > 0 else None,
    }


def run_telemetry(channel, vehicles, updates, rate_per_s):
    """Watches `vehicles` vehicles, then sends `updates` telemetry reports paced at
    `rate_per_s`, and reads the events until the server has refused or taken them all."""
    from startmargin.v1 import service_pb2_grpc as rpc

    pb = messages()
    done = {"sent": 0}

    def requests():
        yield pb.WatchFleetRequest(sequence=1, zone_forecast=pb.WatchZoneForecast(zone_id="z", forecast=forecast(pb)))
        for i in range(vehicles):
            yield pb.WatchFleetRequest(
                sequence=i + 2,
                vehicle=pb.WatchedVehicle(vehicle=profile(pb, f"v{i}"), forecast_zone_id="z", departure_time=ts(pb, 10)),
            )
        started = time.monotonic()
        for k in range(updates):
            due = started + k / rate_per_s
            wait = due - time.monotonic()
            if wait > 0:
                time.sleep(wait)
            minutes = 1 + k // vehicles
            yield pb.WatchFleetRequest(
                sequence=10_000_000 + k,
                telemetry=pb.TelemetryUpdate(
                    vehicle_id=f"v{k % vehicles}",
                    telemetry=pb.VehicleTelemetry(observed_at=ts(pb, minutes / 60.0), coolant_c=80.0 - 0.1 * minutes),
                ),
            )
            done["sent"] = k + 1

    stub = rpc.StartMarginServiceStub(channel)
    started = time.monotonic()
    status, detail, events, refused = "OK", "", 0, 0
    try:
        for response in stub.WatchFleet(requests()):
            events += 1
            if response.WhichOneof("event") == "refused":
                refused += 1
    except grpc.RpcError as e:
        status, detail = e.code().name, e.details() or ""
    elapsed_s = time.monotonic() - started
    return {
        "rpc": "WatchFleet telemetry",
        "vehicles": vehicles,
        "sent": done["sent"],
        "events": events,
        "refused": refused,
        "status": status,
        "detail": detail,
        "elapsed_s": round(elapsed_s, 3),
    }


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("mode", choices=["fleet", "watch", "telemetry"])
    parser.add_argument("--target", required=True)
    parser.add_argument("--vehicles", type=int, default=1000)
    parser.add_argument("--updates", type=int, default=20000)
    parser.add_argument("--rate", type=float, default=2000.0)
    parser.add_argument("--timeout-s", type=float, default=600.0)
    args = parser.parse_args()
    generate_stubs()
    with grpc.insecure_channel(args.target) as channel:
        grpc.channel_ready_future(channel).result(timeout=args.timeout_s)
        if args.mode == "fleet":
            result = run_fleet(channel, args.vehicles)
        elif args.mode == "watch":
            result = run_watch(channel, args.vehicles)
        else:
            result = run_telemetry(channel, args.vehicles, args.updates, args.rate)
    print(json.dumps(result), flush=True)


if __name__ == "__main__":
    main()
