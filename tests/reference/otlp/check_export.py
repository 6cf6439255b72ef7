#!/usr/bin/env python3
"""Parse a trace export payload of ours with the OTLP protobuf definitions.

The payload is one request body our exporter sent (written by the test
`otlp::a_sampled_request_is_exported_as_a_server_span_with_a_client_span_per_upstream_call`
when CALCIUM_CDS_OTLP_SAMPLE_OUT is set). It is parsed into
`opentelemetry.proto.collector.trace.v1.ExportTraceServiceRequest` with
protobuf's JSON parser, refusing unknown fields, so every field name, type,
enum number and nesting must be what the OTLP definitions say.

The one documented difference between OTLP JSON and protobuf's own JSON
mapping is handled first (OTLP specification, "JSON Protobuf Encoding"):
traceId, spanId and parentSpanId are hex strings in OTLP JSON, base64 in
protobuf's mapping; they are converted, after checking they are lowercase hex
of the right length (16 bytes trace id, 8 bytes span id).

Usage: check_export.py PAYLOAD.json   (exit 0 when it parses and holds)
"""
import base64
import json
import re
import sys

from google.protobuf import json_format
from opentelemetry.proto.collector.trace.v1.trace_service_pb2 import ExportTraceServiceRequest
from opentelemetry.proto.trace.v1.trace_pb2 import Span

HEX = {"traceId": 32, "spanId": 16, "parentSpanId": 16}


def hex_to_base64(node):
    if isinstance(node, dict):
        for key, value in list(node.items()):
            if key in HEX:
                if not re.fullmatch(r"[0-9a-f]{%d}" % HEX[key], value):
                    sys.exit(f"{key} {value!r} is not {HEX[key]} lowercase hex digits")
                node[key] = base64.b64encode(bytes.fromhex(value)).decode()
            else:
                hex_to_base64(value)
    elif isinstance(node, list):
        for item in node:
            hex_to_base64(item)


def main(path):
    payload = json.load(open(path, encoding="utf-8"))
    hex_to_base64(payload)
    request = ExportTraceServiceRequest()
    json_format.ParseDict(payload, request, ignore_unknown_fields=False)
    spans = [s for rs in request.resource_spans for ss in rs.scope_spans for s in ss.spans]
    if not spans:
        sys.exit("no spans in the payload")
    kinds = {s.kind for s in spans}
    if not {Span.SPAN_KIND_SERVER, Span.SPAN_KIND_CLIENT} <= kinds:
        sys.exit(f"expected server and client spans, got kinds {sorted(kinds)}")
    for s in spans:
        if len(s.trace_id) != 16 or len(s.span_id) != 8:
            sys.exit(f"span {s.name}: id lengths {len(s.trace_id)}/{len(s.span_id)}")
        if s.end_time_unix_nano < s.start_time_unix_nano or s.start_time_unix_nano == 0:
            sys.exit(f"span {s.name}: times {s.start_time_unix_nano}..{s.end_time_unix_nano}")
    service = {a.key: a.value.string_value for a in request.resource_spans[0].resource.attributes}
    if service.get("service.name") != "calcium-cds":
        sys.exit(f"resource attributes {service}")
    print(f"OTLP export payload parses as ExportTraceServiceRequest: {len(spans)} spans, kinds {sorted(kinds)}")


if __name__ == "__main__":
    main(sys.argv[1])
