#!/usr/bin/python3
"""Submit a job spec to a soak farm, or pick up a job already there, and
print its progress until it ends.

    ./gen_stubs.sh                      # once: Python modules of the schema
    ./watch_job.py --farm 127.0.0.1:7431 --spec ../demo/bead-tray-oil-quench.yaml
    ./watch_job.py --farm 127.0.0.1:7431 --job JOB_ID

Needs python3-grpcio and python3-protobuf (python3-yaml for YAML specs).
Exits 0 when the job finished, 1 when it failed, 3 when it was cancelled.
If the stream drops, it resumes after the last event it printed.
"""

import argparse
import json
import os
import sys
import time

import grpc
from google.protobuf import json_format

HERE = os.path.dirname(os.path.abspath(__file__))


def load_spec(path, spec_pb2):
    """Reads a YAML or JSON spec into a JobSpec; the keys are the schema's
    field names, so the protobuf JSON mapping reads both."""
    with open(path, encoding="utf-8") as f:
        text = f.read()
    if path.endswith((".yaml", ".yml")):
        import yaml  # only needed for YAML specs

        data = yaml.safe_load(text)
    else:
        data = json.loads(text)
    return json_format.ParseDict(data, spec_pb2.JobSpec())


def describe(event):
    """One line for one job event."""
    kind = event.WhichOneof("kind")
    if kind == "queued":
        return "queued"
    if kind == "started":
        return "started on %s (attempt %d)" % (event.started.worker, event.started.attempt)
    if kind == "progress":
        p = event.progress
        line = "t=%.0f/%.0f s" % (p.sim_time_s, p.end_s)
        for probe in p.probes:
            line += " %s=%.1f C" % (probe.name, probe.temp_c)
        return line + " energy %.0f%%" % (100 * p.energy_fraction)
    if kind == "milestone":
        return "milestone %s reached at %.1f s" % (event.milestone.name, event.milestone.time_s)
    if kind == "finished":
        s = event.finished.summary
        return "finished: %s at %.6g s" % (s.stop_reason, s.end_time_s)
    if kind == "failed":
        return "failed: %s" % event.failed.reason
    if kind == "cancelled":
        return "cancelled: %s" % event.cancelled.reason
    return kind or "unknown event"


EXIT_CODES = {"finished": 0, "failed": 1, "cancelled": 3}


def watch(stub, farm_pb2, job_id, max_attempts=8):
    """Prints the job's events; returns the exit code of its outcome."""
    last, failures = 0, 0
    while True:
        try:
            request = farm_pb2.WatchJobRequest(job_id=job_id, after_sequence=last)
            for response in stub.WatchJob(request):
                event = response.event
                if event.sequence <= last:
                    continue
                last, failures = event.sequence, 0
                print("[%d] %s" % (event.sequence, describe(event)), flush=True)
                kind = event.WhichOneof("kind")
                if kind in EXIT_CODES:
                    return EXIT_CODES[kind]
            failure = "stream ended before the job did"
        except grpc.RpcError as err:
            if err.code() not in (grpc.StatusCode.UNAVAILABLE, grpc.StatusCode.INTERNAL):
                raise
            failure = err.details()
        failures += 1
        if failures > max_attempts:
            raise SystemExit("giving up after %d attempts: %s" % (max_attempts, failure))
        print("stream dropped (%s); resuming after event %d" % (failure, last), file=sys.stderr)
        time.sleep(min(0.2 * 2 ** failures, 8))


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--farm", default=os.environ.get("SOAK_FARM", "127.0.0.1:7431"), help="scheduler host:port")
    ap.add_argument("--stubs", default=os.path.join(HERE, "stubs"), help="folder gen_stubs.sh wrote")
    which = ap.add_mutually_exclusive_group(required=True)
    which.add_argument("--spec", help="spec file (YAML or JSON) to submit")
    which.add_argument("--job", help="id of a job to watch")
    args = ap.parse_args()

    sys.path.insert(0, args.stubs)
    try:
        from soak.v1 import farm_pb2, farm_pb2_grpc, spec_pb2
    except ImportError as err:
        raise SystemExit("no Python modules of the schema in %s (%s): run gen_stubs.sh first" % (args.stubs, err))

    with grpc.insecure_channel(args.farm) as channel:
        stub = farm_pb2_grpc.FarmServiceStub(channel)
        job_id = args.job
        if args.spec:
            resp = stub.SubmitJob(farm_pb2.SubmitJobRequest(spec=load_spec(args.spec, spec_pb2)))
            job_id = resp.job.id
            print("submitted job %s (%s)" % (job_id, resp.job.spec.name), flush=True)
        return watch(stub, farm_pb2, job_id)


if __name__ == "__main__":
    sys.exit(main())
