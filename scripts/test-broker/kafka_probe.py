#!/usr/bin/env python3
"""Owns: the small stdlib-only helpers broker.sh needs around the test broker.

  free-ports N                       print N distinct free TCP ports on 127.0.0.1
  cluster-id                         print a fresh KRaft cluster id (base64url UUID)
  wait-ready BOOTSTRAP TIMEOUT [PID] send real Metadata requests until the broker
                                     answers with itself in the broker list
  wait-topic BOOTSTRAP NAME PARTS TIMEOUT
                                     wait until topic NAME has PARTS partitions,
                                     each with a leader
  describe BOOTSTRAP                 print one line per topic: NAME PARTITIONS

The Kafka wire protocol is spoken directly over a socket: ApiVersions v0 first
(every broker answers it) to learn which Metadata versions it serves, then the
highest non-flexible Metadata version (v1..v8) both sides know.
Exit codes: 0 ok, 1 timeout / not as expected, 2 usage error.
"""

import base64
import os
import socket
import struct
import sys
import time
import uuid

API_METADATA = 3
API_VERSIONS = 18
CLIENT_ID = b"sieveline-test-broker"


class Reader:
    def __init__(self, data):
        self.data = data
        self.pos = 0

    def take(self, n):
        if self.pos + n > len(self.data):
            raise ValueError("short response")
        chunk = self.data[self.pos:self.pos + n]
        self.pos += n
        return chunk

    def i8(self):
        return struct.unpack(">b", self.take(1))[0]

    def i16(self):
        return struct.unpack(">h", self.take(2))[0]

    def i32(self):
        return struct.unpack(">i", self.take(4))[0]

    def string(self):
        n = self.i16()
        if n < 0:
            return None
        return self.take(n).decode("utf-8", "replace")

    def i32_array(self):
        n = self.i32()
        return [self.i32() for _ in range(max(n, 0))]


def request(sock, api_key, api_version, corr, body):
    header = struct.pack(">hhih", api_key, api_version, corr, len(CLIENT_ID)) + CLIENT_ID
    payload = header + body
    sock.sendall(struct.pack(">i", len(payload)) + payload)
    size = struct.unpack(">i", recv_exact(sock, 4))[0]
    data = recv_exact(sock, size)
    r = Reader(data)
    got = r.i32()
    if got != corr:
        raise ValueError("correlation id mismatch")
    return r


def recv_exact(sock, n):
    buf = b""
    while len(buf) < n:
        chunk = sock.recv(n - len(buf))
        if not chunk:
            raise ConnectionError("connection closed by broker")
        buf += chunk
    return buf


def api_versions(sock):
    r = request(sock, API_VERSIONS, 0, 1, b"")
    err = r.i16()
    versions = {}
    for _ in range(max(r.i32(), 0)):
        key, lo, hi = r.i16(), r.i16(), r.i16()
        versions[key] = (lo, hi)
    if err not in (0, 35):  # 35 = UNSUPPORTED_VERSION still lists the keys
        raise ValueError("ApiVersions error %d" % err)
    return versions


def metadata(bootstrap, topics=None, timeout=5.0):
    """One Metadata round trip. Returns (brokers, controller_id, topics) where
    topics maps name -> (error_code, [(partition, error_code, leader)])."""
    host, port = bootstrap.rsplit(":", 1)
    with socket.create_connection((host, int(port)), timeout=timeout) as sock:
        sock.settimeout(timeout)
        versions = api_versions(sock)
        lo, hi = versions.get(API_METADATA, (0, -1))
        v = min(hi, 8)
        if v < max(lo, 1):
            raise ValueError("broker serves no Metadata version in v1..v8 (%d..%d)" % (lo, hi))
        if topics is None:
            body = struct.pack(">i", -1)
        else:
            body = struct.pack(">i", len(topics))
            for t in topics:
                tb = t.encode()
                body += struct.pack(">h", len(tb)) + tb
        if v >= 4:
            body += struct.pack(">b", 0)  # allow_auto_topic_creation = false
        if v >= 8:
            body += struct.pack(">bb", 0, 0)  # no authorized-operations
        r = request(sock, API_METADATA, v, 2, body)
        if v >= 3:
            r.i32()  # throttle_time_ms
        brokers = []
        for _ in range(max(r.i32(), 0)):
            node, bhost, bport, _rack = r.i32(), r.string(), r.i32(), r.string()
            brokers.append((node, bhost, bport))
        if v >= 2:
            r.string()  # cluster_id
        controller = r.i32()
        out = {}
        for _ in range(max(r.i32(), 0)):
            terr, name, _internal = r.i16(), r.string(), r.i8()
            parts = []
            for _ in range(max(r.i32(), 0)):
                perr, pidx, leader = r.i16(), r.i32(), r.i32()
                if v >= 7:
                    r.i32()  # leader_epoch
                r.i32_array()  # replicas
                r.i32_array()  # isr
                if v >= 5:
                    r.i32_array()  # offline replicas
                parts.append((pidx, perr, leader))
            if v >= 8:
                r.i32()  # topic authorized operations
            out[name] = (terr, sorted(parts))
        return brokers, controller, out


def alive(pid):
    if not pid:
        return True
    try:
        os.kill(int(pid), 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    # a zombie still answers kill(0)
    try:
        with open("/proc/%d/stat" % int(pid)) as f:
            return f.read().rsplit(")", 1)[1].split()[0] != "Z"
    except OSError:
        return False


def wait_ready(bootstrap, timeout, pid=None):
    deadline = time.monotonic() + timeout
    last = "no answer yet"
    while time.monotonic() < deadline:
        if not alive(pid):
            print("kafka_probe: broker process %s exited before it was ready" % pid, file=sys.stderr)
            return 1
        try:
            brokers, controller, _ = metadata(bootstrap, topics=[], timeout=3.0)
            if brokers and controller >= 0:
                desc = ",".join("%d@%s:%d" % b for b in brokers)
                print("kafka_probe: metadata ok: brokers=%s controller=%d" % (desc, controller),
                      file=sys.stderr)
                return 0
            last = "metadata answered without brokers/controller"
        except (OSError, ValueError) as e:
            last = "%s: %s" % (type(e).__name__, e)
        time.sleep(0.25)
    print("kafka_probe: broker at %s not ready after %ss (last: %s)" % (bootstrap, timeout, last),
          file=sys.stderr)
    return 1


def wait_topic(bootstrap, name, parts, timeout):
    deadline = time.monotonic() + timeout
    last = "no answer yet"
    while time.monotonic() < deadline:
        try:
            _, _, topics = metadata(bootstrap, topics=[name], timeout=3.0)
            terr, plist = topics.get(name, (-1, []))
            leaders = [p for p in plist if p[1] == 0 and p[2] >= 0]
            if terr == 0 and len(plist) == parts and len(leaders) == parts:
                return 0
            if terr == 0 and len(plist) > 0 and len(plist) != parts:
                print("kafka_probe: topic %s has %d partitions, wanted %d"
                      % (name, len(plist), parts), file=sys.stderr)
                return 1
            last = "error=%d partitions=%d with-leader=%d" % (terr, len(plist), len(leaders))
        except (OSError, ValueError) as e:
            last = "%s: %s" % (type(e).__name__, e)
        time.sleep(0.2)
    print("kafka_probe: topic %s not ready after %ss (last: %s)" % (name, timeout, last),
          file=sys.stderr)
    return 1


def free_ports(n):
    socks, ports = [], []
    try:
        while len(ports) < n:
            s = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
            s.bind(("127.0.0.1", 0))
            socks.append(s)
            ports.append(s.getsockname()[1])
    finally:
        for s in socks:
            s.close()
    return ports


def main(argv):
    if not argv:
        print(__doc__, file=sys.stderr)
        return 2
    cmd, args = argv[0], argv[1:]
    if cmd == "free-ports" and len(args) == 1:
        print(" ".join(str(p) for p in free_ports(int(args[0]))))
        return 0
    if cmd == "cluster-id" and not args:
        # like Kafka's own Uuid.randomUuid(): never starting with '-', so the
        # id cannot be taken for a command-line option
        while True:
            cid = base64.urlsafe_b64encode(uuid.uuid4().bytes).decode().rstrip("=")
            if not cid.startswith("-"):
                print(cid)
                return 0
    if cmd == "wait-ready" and len(args) in (2, 3):
        return wait_ready(args[0], float(args[1]), args[2] if len(args) == 3 else None)
    if cmd == "wait-topic" and len(args) == 4:
        return wait_topic(args[0], args[1], int(args[2]), float(args[3]))
    if cmd == "describe" and len(args) == 1:
        _, _, topics = metadata(args[0])
        for name in sorted(topics):
            print("%s %d" % (name, len(topics[name][1])))
        return 0
    print(__doc__, file=sys.stderr)
    return 2


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
