#!/usr/bin/env python3
"""Time from exec to the first 200 of /readyz, over several starts.

Usage: ready_time.py BINARY PORT [RUNS]. Polls with a raw socket every 0.5 ms
(no HTTP library start-up in the measured path). Prints each time and the median.
"""
import os
import socket
import statistics
import subprocess
import sys
import time


def ready(port):
    try:
        with socket.create_connection(("127.0.0.1", port), timeout=0.2) as s:
            s.sendall(b"GET /readyz HTTP/1.1\r\nHost: x\r\nConnection: close\r\n\r\n")
            return s.recv(64).startswith(b"HTTP/1.1 200")
    except OSError:
        return False


def once(binary, port):
    env = {"CALCIUM_CDS_LISTEN": f"127.0.0.1:{port}", "CALCIUM_CDS_LOG": "warn", "PATH": os.environ.get("PATH", "")}
    start = time.perf_counter()
    proc = subprocess.Popen([binary, "serve"], env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        while not ready(port):
            if proc.poll() is not None:
                sys.exit(f"the service exited with {proc.returncode} before it was ready")
            if time.perf_counter() - start > 10:
                sys.exit("not ready within 10 s")
            time.sleep(0.0005)
        return (time.perf_counter() - start) * 1000
    finally:
        proc.terminate()
        proc.wait()


def main():
    binary, port = sys.argv[1], int(sys.argv[2])
    runs = int(sys.argv[3]) if len(sys.argv) > 3 else 10
    times = [once(binary, port) for _ in range(runs)]
    print("start-to-ready ms: " + " ".join(f"{t:.1f}" for t in times))
    print(f"READY median_ms={statistics.median(times):.1f} max_ms={max(times):.1f} runs={runs}")


if __name__ == "__main__":
    main()
