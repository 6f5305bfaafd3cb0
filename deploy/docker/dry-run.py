#!/usr/bin/env python3
"""Owns: running deploy/docker/Dockerfile's steps without a container engine.

The build stage's RUN lines run for real in the repository root (standing in for the build
stage's WORKDIR after `COPY . .`): the same dependency script and the same cargo build. The
runtime stage is staged into a directory: COPY --from=build copies the built binary, mkdir
lines create their folders, WORKDIR is created. Runtime RUN lines (package installs, user
creation) need root inside a fresh image, so they are not run; instead the script checks what
they must achieve:
  - every shared library the binary links against comes from a package the runtime stage
    installs, or from the base image's essential set (the dependency closure of `dpkg`, which
    every Debian image has), resolved with dpkg on this host, which must run the same Debian
    release as the runtime image;
  - USER is a numeric non-root uid:gid, the same the useradd line creates;
  - ENTRYPOINT and CMD are exec-form JSON arrays (in shell form /bin/sh would be PID 1 and
    would not pass SIGTERM on, so the drain on shutdown would never run);
  - the builder's Rust version is the toolchain used here.
The report (JSON on stdout) gives the entry command, ENV, USER, EXPOSE and WORKDIR, so
tests/deploy_docker.rs can run the same entry command from the staging directory.

Usage: python3 deploy/docker/dry-run.py --staging DIR [--dockerfile FILE]
Exit status 0 when every step ran and every check passed; 1 otherwise (the reason on stderr).
"""

import argparse
import json
import os
import re
import shlex
import shutil
import subprocess
import sys

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def fail(msg):
    print(f"dry-run: error: {msg}", file=sys.stderr)
    sys.exit(1)


def log(msg):
    print(f"dry-run: {msg}", file=sys.stderr)


def instructions(path):
    """(keyword, argument text, line number) for each instruction; continuations joined."""
    out, buf, start = [], "", 0
    with open(path, encoding="utf-8") as f:
        for n, raw in enumerate(f, 1):
            line = raw.rstrip("\n")
            if not buf and (not line.strip() or line.lstrip().startswith("#")):
                continue
            if buf and line.lstrip().startswith("#"):
                continue  # comment lines inside a continuation are dropped, as Docker does
            if not buf:
                start = n
            if line.endswith("\\"):
                buf += line[:-1] + " "
                continue
            buf += line
            kw, _, rest = buf.strip().partition(" ")
            out.append((kw.upper(), rest.strip(), start))
            buf = ""
    if buf:
        fail(f"{path}: the last instruction ends with a continuation")
    return out


def stages(instrs):
    result = []
    for kw, arg, n in instrs:
        if kw == "FROM":
            m = re.fullmatch(r"(\S+)(?:\s+AS\s+(\S+))?", arg, re.IGNORECASE)
            if not m:
                fail(f"line {n}: cannot read FROM {arg!r}")
            result.append({"image": m.group(1), "name": m.group(2), "steps": []})
        elif not result:
            if kw != "ARG":
                fail(f"line {n}: {kw} before the first FROM")
        else:
            result[-1]["steps"].append((kw, arg, n))
    return result


def exec_form(kw, arg, n):
    try:
        v = json.loads(arg)
    except json.JSONDecodeError:
        fail(f"line {n}: {kw} must be an exec-form JSON array: in shell form /bin/sh is PID 1 and SIGTERM never reaches sieveline")
    if not (isinstance(v, list) and v and all(isinstance(x, str) for x in v)):
        fail(f"line {n}: {kw} must be a non-empty JSON array of strings")
    return v


def debian_codename():
    with open("/etc/os-release", encoding="utf-8") as f:
        for line in f:
            if line.startswith("VERSION_CODENAME="):
                return line.split("=", 1)[1].strip().strip('"')
    fail("cannot read VERSION_CODENAME from /etc/os-release")


def package_of(path):
    """The Debian package owning a file (through usrmerge symlinks too)."""
    for p in dict.fromkeys([path, os.path.realpath(path)]):
        r = subprocess.run(["dpkg", "-S", p], capture_output=True, text=True)
        if r.returncode == 0:
            return r.stdout.split(":", 1)[0].strip()
        alt = p.replace("/usr/lib/", "/lib/", 1) if p.startswith("/usr/lib/") else p.replace("/lib/", "/usr/lib/", 1)
        r = subprocess.run(["dpkg", "-S", alt], capture_output=True, text=True)
        if r.returncode == 0:
            return r.stdout.split(":", 1)[0].strip()
    fail(f"no Debian package owns {path} on this host")


def depends_closure(root_pkg):
    """Packages reachable from root_pkg over Pre-Depends and Depends, as installed here."""
    seen, todo = set(), [root_pkg]
    while todo:
        p = todo.pop()
        if p in seen:
            continue
        r = subprocess.run(["dpkg-query", "-W", "-f=${Pre-Depends}, ${Depends}", p], capture_output=True, text=True)
        if r.returncode != 0:
            continue  # an alternative not installed here
        seen.add(p)
        for dep in r.stdout.split(","):
            for alt in dep.split("|"):
                name = alt.strip().split(" ")[0].split(":")[0]
                if name:
                    todo.append(name)
    return seen


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--staging", required=True, help="directory standing in for the runtime image's file system")
    ap.add_argument("--dockerfile", default=os.path.join(ROOT, "deploy/docker/Dockerfile"))
    a = ap.parse_args()
    staging = os.path.abspath(a.staging)
    os.makedirs(staging, exist_ok=True)

    st = stages(instructions(a.dockerfile))
    if len(st) != 2 or not st[0]["name"]:
        fail("expected two stages: a named build stage and the runtime stage")
    build, runtime = st

    # Same toolchain and Debian release as the images.
    m = re.fullmatch(r"rust:(\d+\.\d+)(?:\.\d+)?-(\w+)", build["image"])
    if not m:
        fail(f"build stage image {build['image']!r} is not rust:<version>-<debian release>")
    rust_version, build_release = m.group(1), m.group(2)
    rustc = subprocess.run(["rustc", "--version"], capture_output=True, text=True, check=True).stdout
    if not rustc.startswith(f"rustc {rust_version}."):
        fail(f"the build stage uses Rust {rust_version}, this machine has {rustc.strip()}")
    m = re.fullmatch(r"debian:(\w+)-slim", runtime["image"])
    if not m:
        fail(f"runtime image {runtime['image']!r} is not debian:<release>-slim (glibc, slim)")
    release = m.group(1)
    host_release = debian_codename()
    if release != build_release or release != host_release:
        fail(f"build ({build_release}), runtime ({release}) and this host ({host_release}) must be the same Debian release")

    ran, not_run = [], []
    # Build stage: WORKDIR /src + COPY . . is the repository root.
    workdir = None
    for kw, arg, n in build["steps"]:
        if kw == "WORKDIR":
            workdir = arg
        elif kw == "COPY":
            if arg != ". .":
                fail(f"line {n}: the build stage copies the whole context with `COPY . .`; got {arg!r}")
        elif kw == "RUN":
            if arg.startswith("["):
                cmd = exec_form(kw, arg, n)
            else:
                cmd = ["/bin/sh", "-c", arg]
            log(f"line {n}: RUN {arg}")
            r = subprocess.run(cmd, cwd=ROOT)
            if r.returncode != 0:
                fail(f"line {n}: RUN {arg!r} exited {r.returncode}")
            ran.append(arg)
        elif kw in ("ENV", "ARG"):
            fail(f"line {n}: {kw} in the build stage is not supported by the dry run; pass settings in RUN")
        else:
            fail(f"line {n}: {kw} in the build stage is not supported by the dry run")
    if not workdir:
        fail("the build stage has no WORKDIR")

    packages, uid_created, report = [], None, {"env": {}, "expose": [], "copies": []}
    for kw, arg, n in runtime["steps"]:
        if kw == "RUN":
            words = shlex.split(arg)
            for i, w in enumerate(words):
                if w == "install" and i > 0 and words[i - 1] in ("apt-get", "apt"):
                    for p in words[i + 1:]:
                        if p in ("&&", ";", "||"):
                            break
                        if not p.startswith("-"):
                            packages.append(p)
                if w == "useradd" and "--uid" in words[i:]:
                    uid_created = words[words.index("--uid", i) + 1]
                if w == "mkdir":
                    for d in words[i + 1:]:
                        if d in ("&&", ";", "||"):
                            break
                        if d.startswith("/"):
                            os.makedirs(staging + d, exist_ok=True)
            not_run.append({"line": n, "run": arg, "why": "needs root inside the image; its effects are checked instead"})
        elif kw == "COPY":
            words = arg.split()
            if len(words) != 3 or not words[0].startswith("--from="):
                fail(f"line {n}: the runtime stage copies from the build stage only: COPY --from=build SRC DST")
            if words[0] != f"--from={build['name']}":
                fail(f"line {n}: COPY {words[0]} does not name the build stage {build['name']!r}")
            src, dst = words[1], words[2]
            if not src.startswith(workdir + "/"):
                fail(f"line {n}: {src} is outside the build stage's WORKDIR {workdir}")
            host_src = os.path.join(ROOT, src[len(workdir) + 1:])
            if not os.path.isfile(host_src):
                fail(f"line {n}: {host_src} was not built")
            os.makedirs(os.path.dirname(staging + dst), exist_ok=True)
            shutil.copy2(host_src, staging + dst)
            report["copies"].append({"from": host_src, "to": staging + dst})
        elif kw == "USER":
            report["user"] = arg
        elif kw == "WORKDIR":
            report["workdir"] = arg
            os.makedirs(staging + arg, exist_ok=True)
        elif kw == "ENV":
            k, _, v = arg.partition("=")
            if not v:
                fail(f"line {n}: write ENV as KEY=VALUE")
            report["env"][k] = v
        elif kw == "EXPOSE":
            report["expose"] += [int(p.split("/")[0]) for p in arg.split()]
        elif kw in ("ENTRYPOINT", "CMD"):
            report[kw.lower()] = exec_form(kw, arg, n)
        else:
            fail(f"line {n}: {kw} in the runtime stage is not supported by the dry run")

    # Non-root user, the one the image creates.
    user = report.get("user")
    if not user or not re.fullmatch(r"\d+:\d+", user):
        fail(f"USER must be a numeric uid:gid (Kubernetes runAsNonRoot needs numbers); got {user!r}")
    uid = user.split(":")[0]
    if uid == "0":
        fail("USER is root")
    if uid != uid_created:
        fail(f"USER {uid} is not the uid the runtime stage creates ({uid_created})")
    if "entrypoint" not in report or "cmd" not in report:
        fail("the runtime stage needs ENTRYPOINT and CMD")
    binary = staging + report["entrypoint"][0]
    if not os.access(binary, os.X_OK):
        fail(f"the entry point {report['entrypoint'][0]} is not an executable copied into the image")

    # Shared libraries: from the installed packages or the base image's essential set.
    base = depends_closure("dpkg")
    ldd = subprocess.run(["ldd", binary], capture_output=True, text=True, check=True).stdout
    libraries = {}
    for line in ldd.splitlines():
        if "not found" in line:
            fail(f"the binary needs a library this host lacks: {line.strip()}")
        m = re.match(r"\s*(\S+) => (/\S+)", line)
        if m:
            pkg = package_of(m.group(2))
            libraries[m.group(1)] = pkg
            if pkg not in packages and pkg not in base:
                fail(f"{m.group(1)} comes from {pkg}, which the runtime stage does not install (it installs {packages})")

    report.update({
        "staging": staging,
        "entry": report["entrypoint"] + report["cmd"],
        "binary": binary,
        "uid": int(uid),
        "gid": int(user.split(":")[1]),
        "runtime_packages": packages,
        "libraries": libraries,
        "debian_release": release,
        "rust_version": rust_version,
        "ran": ran,
        "not_run": not_run,
    })
    json.dump(report, sys.stdout, indent=2, sort_keys=True)
    print()


if __name__ == "__main__":
    main()
