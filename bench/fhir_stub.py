#!/usr/bin/env python3
"""A tiny stand-in for an EHR's FHIR server, for API fuzzing and the soak.

Invented data (the Larkspur Children's Hospital scenario): any Patient id is
a 6-year-old girl; the Observation search returns one low ionized calcium
(0.95 mmol/L) and a body weight; every other search is empty. Optional fixed
delay on every answer.

Usage: fhir_stub.py PORT [DELAY_MS]
"""
import datetime
import json
import re
import sys
import time
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer

PORT = int(sys.argv[1])
DELAY = (int(sys.argv[2]) if len(sys.argv) > 2 else 0) / 1000.0
LOINC = "http://loinc.org"


def now_iso(hours_ago=0):
    t = datetime.datetime.now(datetime.timezone.utc) - datetime.timedelta(hours=hours_ago)
    return t.strftime("%Y-%m-%dT%H:%M:%SZ")


def observation(oid, pid, code, display, value, unit):
    return {
        "resourceType": "Observation", "id": oid, "status": "final",
        "code": {"coding": [{"system": LOINC, "code": code, "display": display}]},
        "subject": {"reference": f"Patient/{pid}"}, "effectiveDateTime": now_iso(1),
        "valueQuantity": {"value": value, "unit": unit, "system": "http://unitsofmeasure.org", "code": unit},
    }


def searchset(base, resources):
    return {"resourceType": "Bundle", "type": "searchset", "total": len(resources),
            "entry": [{"fullUrl": f"{base}/{r['resourceType']}/{r['id']}", "resource": r, "search": {"mode": "match"}}
                      for r in resources]}


class Handler(BaseHTTPRequestHandler):
    protocol_version = "HTTP/1.1"

    def log_message(self, *args):
        pass

    def send_json(self, status, body):
        data = json.dumps(body).encode()
        self.send_response(status)
        self.send_header("Content-Type", "application/fhir+json")
        self.send_header("Content-Length", str(len(data)))
        self.end_headers()
        self.wfile.write(data)

    def do_GET(self):
        if DELAY:
            time.sleep(DELAY)
        base = f"http://127.0.0.1:{PORT}"
        path, _, query = self.path.partition("?")
        m = re.fullmatch(r"/Patient/([A-Za-z0-9\-.]{1,64})", path)
        if m:
            birth = (datetime.date.today() - datetime.timedelta(days=6 * 365 + 40)).isoformat()
            return self.send_json(200, {"resourceType": "Patient", "id": m.group(1), "gender": "female",
                                        "birthDate": birth})
        pid = re.search(r"(?:^|&)patient=([^&]*)", query)
        pid = pid.group(1) if pid else "unknown"
        if path == "/Observation":
            return self.send_json(200, searchset(base, [
                observation("ica-stub-1", pid, "1994-3", "Calcium.ionized [Moles/volume] in Blood", 0.95, "mmol/L"),
                observation("wt-stub-1", pid, "29463-7", "Body weight", 21.0, "kg"),
            ]))
        if path.lstrip("/") in {"MedicationRequest", "MedicationStatement", "MedicationAdministration",
                                "Condition", "Procedure"}:
            return self.send_json(200, searchset(base, []))
        self.send_json(404, {"resourceType": "OperationOutcome",
                             "issue": [{"severity": "error", "code": "not-found"}]})

    def do_POST(self):
        length = int(self.headers.get("Content-Length") or 0)
        self.rfile.read(length)
        self.send_json(200, {"resourceType": "Bundle", "type": "transaction-response", "entry": []})


class Server(ThreadingHTTPServer):
    # The default listen backlog (5) drops connections when the service opens
    # many at once (7 calls per patient assessment on every connection); a
    # dropped SYN is retried after 1 s and 3 s, past the service's call timeout.
    request_queue_size = 1024
    daemon_threads = True


if __name__ == "__main__":
    Server(("127.0.0.1", PORT), Handler).serve_forever()
