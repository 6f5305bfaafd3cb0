#!/usr/bin/env bash
# Owns: the real Apache Kafka test broker of sieveline's integration tests --
# resolving its jars into a reusable cache, starting one KRaft node
# (broker+controller) on free 127.0.0.1 ports inside a test-run folder,
# waiting until it answers a real Metadata request, restarting it on the same
# ports, stopping it, and creating topics on it.
#
# Usage:
#   broker.sh install                      resolve jars into the cache only
#   broker.sh start DIR                    new broker in DIR; prints bootstrap last
#   broker.sh restart DIR                  same ports, same log dir; prints bootstrap last
#   broker.sh stop DIR                     SIGTERM, up to 30 s, then SIGKILL; idempotent
#   broker.sh create-topic DIR NAME PARTITIONS [extra kafka-topics args...]
#   broker.sh list-topics DIR              one topic name a line
#   broker.sh acls DIR ARGS...             run Kafka's ACL tool on DIR's broker (e.g. --add
#                                          --deny-principal User:ANONYMOUS --operation Describe
#                                          --topic NAME); the broker needs an authorizer
#                                          (SIEVELINE_BROKER_EXTRA_PROPS at start)
#   broker.sh status DIR                   exit 0 if running and answering metadata
#   broker.sh bootstrap DIR                print DIR's bootstrap address
#
# Environment (all optional):
#   SIEVELINE_KAFKA_VERSION       Kafka version (4.x), default 4.1.1
#   SIEVELINE_LOG4J_VERSION       log4j2 backend version, default 2.24.3 (what Kafka 4.1 ships)
#   SIEVELINE_BROKER_CACHE        jar cache dir, default ~/.cache/sieveline/kafka-<version>/lib
#   SIEVELINE_BROKER_HEAP_OPTS    broker heap, default "-Xmx512m -Xms256m"
#   SIEVELINE_BROKER_JVM_OPTS     extra JVM options for the broker
#   SIEVELINE_BROKER_READY_TIMEOUT seconds to wait for readiness, default 90
#   SIEVELINE_BROKER_STOP_TIMEOUT seconds between SIGTERM and SIGKILL, default 30
#   SIEVELINE_BROKER_EXTRA_PROPS  extra server.properties lines (newline separated)
#   SIEVELINE_MAVEN_ARGS          extra arguments for mvn (e.g. -o, -Dmaven.repo.local=...)
#   JAVA                          java binary, default $JAVA_HOME/bin/java or java on PATH
#
# Stdout carries only results (the bootstrap address, topic names); progress
# and errors go to stderr. Nothing under DIR is ever deleted.

set -euo pipefail

HERE="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
KAFKA_VERSION="${SIEVELINE_KAFKA_VERSION:-4.1.1}"
LOG4J_VERSION="${SIEVELINE_LOG4J_VERSION:-2.24.3}"
CACHE_LIB="${SIEVELINE_BROKER_CACHE:-${HOME:-/root}/.cache/sieveline/kafka-${KAFKA_VERSION}/lib}"
HEAP_OPTS="${SIEVELINE_BROKER_HEAP_OPTS:--Xmx512m -Xms256m}"
READY_TIMEOUT="${SIEVELINE_BROKER_READY_TIMEOUT:-90}"
STOP_TIMEOUT="${SIEVELINE_BROKER_STOP_TIMEOUT:-30}"
PROBE="$HERE/kafka_probe.py"

# Main classes, as laid out in Kafka 4.x jars.
MAIN_BROKER="kafka.Kafka"                          # kafka_2.13
MAIN_STORAGE="kafka.tools.StorageTool"             # kafka_2.13
MAIN_TOPICS="org.apache.kafka.tools.TopicCommand"  # kafka-tools
MAIN_ACLS="org.apache.kafka.tools.AclCommand"      # kafka-tools

log() { printf 'broker.sh: %s\n' "$*" >&2; }
die() { printf 'broker.sh: error: %s\n' "$*" >&2; exit 1; }

java_bin() {
  if [[ -n "${JAVA:-}" ]]; then echo "$JAVA"
  elif [[ -n "${JAVA_HOME:-}" && -x "$JAVA_HOME/bin/java" ]]; then echo "$JAVA_HOME/bin/java"
  else command -v java || die "java not found (need Java 17+)"
  fi
}

need_tools() {
  command -v python3 >/dev/null || die "python3 not found"
  java_bin >/dev/null
}

# ---------------------------------------------------------------- install

cache_stamp() {
  # what a complete cache was made from: the pom, and the versions given to it
  { cat "$HERE/pom.xml"; echo "kafka=$KAFKA_VERSION log4j=$LOG4J_VERSION"; } | sha256sum | cut -d' ' -f1
}

cache_complete() {
  [[ -f "$CACHE_LIB/.sieveline-complete" ]] &&
    [[ "$(cat "$CACHE_LIB/.sieveline-complete")" == "$(cache_stamp)" ]] &&
    [[ -f "$CACHE_LIB/kafka_2.13-$KAFKA_VERSION.jar" ]] &&
    [[ -f "$CACHE_LIB/kafka-tools-$KAFKA_VERSION.jar" ]]
}

cmd_install() {  # cmd_install [quiet]
  if cache_complete; then
    [[ "${1:-}" == quiet ]] || log "jar cache complete: $CACHE_LIB"
    return 0
  fi
  command -v mvn >/dev/null || die "mvn not found (Maven is needed to fill $CACHE_LIB)"
  local parent; parent="$(dirname "$CACHE_LIB")"
  mkdir -p "$parent"
  # one filler at a time; a second caller waits, then finds the cache complete
  exec 9>"$parent/.install.lock"
  flock 9
  if cache_complete; then
    log "jar cache complete: $CACHE_LIB"
    exec 9>&-
    return 0
  fi
  local tmp="$CACHE_LIB.tmp.$$" mvnlog="$parent/maven-install.log" t0=$SECONDS
  rm -rf "$tmp"
  log "resolving Kafka $KAFKA_VERSION jars with Maven into $CACHE_LIB (log: $mvnlog)"
  # shellcheck disable=SC2086
  if ! mvn -B -q -ntp -Dstyle.color=never -f "$HERE/pom.xml" \
        -Dkafka.version="$KAFKA_VERSION" -Dlog4j.version="$LOG4J_VERSION" \
        ${SIEVELINE_MAVEN_ARGS:-} \
        dependency:copy-dependencies -DincludeScope=runtime \
        -DoutputDirectory="$tmp" </dev/null >"$mvnlog" 2>&1; then
    tail -n 40 "$mvnlog" >&2 || true
    rm -rf "$tmp"
    die "Maven could not resolve the broker jars (full log: $mvnlog)"
  fi
  [[ -f "$tmp/kafka_2.13-$KAFKA_VERSION.jar" ]] || die "kafka_2.13-$KAFKA_VERSION.jar missing after Maven ran"
  cache_stamp >"$tmp/.sieveline-complete"
  rm -rf "$CACHE_LIB"
  mv "$tmp" "$CACHE_LIB"
  exec 9>&-
  log "jar cache filled in $((SECONDS - t0)) s: $(find "$CACHE_LIB" -name "*.jar" | wc -l) jars, $(du -sh "$CACHE_LIB" | cut -f1)"
}

# ---------------------------------------------------------------- helpers

abs_dir() {
  [[ -n "${1:-}" ]] || die "missing DIR argument"
  mkdir -p "$1"
  (cd "$1" && pwd)
}

prop() {  # prop FILE KEY -> value
  sed -n "s/^$2=//p" "$1" | tail -n 1
}

broker_pid() {  # prints the pid if DIR's broker is alive
  local dir="$1" pid
  [[ -f "$dir/broker.pid" ]] || return 1
  pid="$(cat "$dir/broker.pid")"
  [[ "$pid" =~ ^[0-9]+$ ]] || return 1
  [[ -r "/proc/$pid/cmdline" ]] || return 1
  # same pid, but is it still our broker (and not a zombie)?
  tr '\0' ' ' <"/proc/$pid/cmdline" | grep -qF "$dir/server.properties" || return 1
  [[ "$(awk '{print $3}' "/proc/$pid/stat" 2>/dev/null)" != "Z" ]] || return 1
  echo "$pid"
}

write_log4j() {
  local dir="$1"
  cat >"$dir/log4j2.properties" <<'EOF'
# Broker logging for the sieveline test broker: everything to stdout (broker.log).
# No log4j shutdown hook, so the broker's own shutdown lines still get logged.
status = warn
shutdownHook = disable
appender.out.type = Console
appender.out.name = OUT
appender.out.target = SYSTEM_OUT
appender.out.layout.type = PatternLayout
appender.out.layout.pattern = [%d] %p %m (%c)%n
rootLogger.level = INFO
rootLogger.appenderRef.out.ref = OUT
logger.request.name = kafka.request.logger
logger.request.level = WARN
logger.authorizer.name = kafka.authorizer.logger
logger.authorizer.level = WARN
EOF
  cat >"$dir/tools-log4j2.properties" <<'EOF'
# Logging of the Kafka command-line tools run by broker.sh: warnings to stderr.
status = warn
appender.err.type = Console
appender.err.name = ERR
appender.err.target = SYSTEM_ERR
appender.err.layout.type = PatternLayout
appender.err.layout.pattern = [%d] %p %m (%c)%n
rootLogger.level = WARN
rootLogger.appenderRef.err.ref = ERR
EOF
}

write_server_properties() {
  local dir="$1" port="$2" cport="$3"
  cat >"$dir/server.properties" <<EOF
# Generated by scripts/test-broker/broker.sh for a sieveline test run.
# One KRaft node, broker and controller in one process, on loopback only.
process.roles=broker,controller
node.id=1
controller.quorum.bootstrap.servers=127.0.0.1:$cport
listeners=PLAINTEXT://127.0.0.1:$port,CONTROLLER://127.0.0.1:$cport
advertised.listeners=PLAINTEXT://127.0.0.1:$port,CONTROLLER://127.0.0.1:$cport
inter.broker.listener.name=PLAINTEXT
controller.listener.names=CONTROLLER
listener.security.protocol.map=CONTROLLER:PLAINTEXT,PLAINTEXT:PLAINTEXT
log.dirs=$dir/kraft-data
num.partitions=1
default.replication.factor=1
min.insync.replicas=1
auto.create.topics.enable=false
delete.topic.enable=true
group.initial.rebalance.delay.ms=0
offsets.topic.replication.factor=1
offsets.topic.num.partitions=1
transaction.state.log.replication.factor=1
transaction.state.log.min.isr=1
transaction.state.log.num.partitions=1
share.coordinator.state.topic.replication.factor=1
share.coordinator.state.topic.min.isr=1
share.coordinator.state.topic.num.partitions=1
num.network.threads=2
num.io.threads=2
num.recovery.threads.per.data.dir=1
log.retention.check.interval.ms=300000
EOF
  if [[ -n "${SIEVELINE_BROKER_EXTRA_PROPS:-}" ]]; then
    printf '# from SIEVELINE_BROKER_EXTRA_PROPS\n%s\n' "$SIEVELINE_BROKER_EXTRA_PROPS" >>"$dir/server.properties"
  fi
}

tool_java() {  # tool_java DIR MAINCLASS ARGS... : a short-lived Kafka tool JVM
  local dir="$1"; shift
  "$(java_bin)" -Xmx256m -XX:+UseSerialGC -XX:TieredStopAtLevel=1 -Djava.awt.headless=true \
    -Dlog4j2.configurationFile="$dir/tools-log4j2.properties" \
    -cp "$CACHE_LIB/*" "$@" </dev/null
}

launch_and_wait() {  # launch_and_wait DIR : start kafka.Kafka on DIR's config, wait for metadata
  local dir="$1" bootstrap pid t0
  bootstrap="$(cat "$dir/bootstrap")"
  printf '\n===== broker.sh: launching %s at %s =====\n' "$MAIN_BROKER" "$(date -u +%FT%TZ)" >>"$dir/broker.log"
  t0=$(date +%s.%N)
  # shellcheck disable=SC2086
  setsid "$(java_bin)" $HEAP_OPTS \
    -server -XX:+UseG1GC -XX:MaxGCPauseMillis=20 -XX:InitiatingHeapOccupancyPercent=35 \
    -XX:+ExplicitGCInvokesConcurrent -XX:+ExitOnOutOfMemoryError -Djava.awt.headless=true \
    -Dlog4j2.configurationFile="$dir/log4j2.properties" \
    ${SIEVELINE_BROKER_JVM_OPTS:-} \
    -cp "$CACHE_LIB/*" "$MAIN_BROKER" "$dir/server.properties" \
    </dev/null >>"$dir/broker.log" 2>&1 &
  pid=$!
  echo "$pid" >"$dir/broker.pid"
  log "broker pid $pid, waiting up to ${READY_TIMEOUT}s for a Metadata answer on $bootstrap"
  if ! python3 "$PROBE" wait-ready "$bootstrap" "$READY_TIMEOUT" "$pid"; then
    log "---- last 60 lines of $dir/broker.log ----"
    tail -n 60 "$dir/broker.log" >&2 || true
    log "---- end of broker.log ----"
    stop_pid "$dir" "$pid" || true
    die "broker in $dir did not become ready (logs kept in $dir)"
  fi
  log "broker ready in $(python3 -c "import sys,time; print('%.1f' % (time.time() - float(sys.argv[1])))" "$t0") s (pid $pid)"
  echo "$bootstrap"
}

stop_pid() {  # stop_pid DIR PID : SIGTERM, wait, SIGKILL
  local dir="$1" pid="$2" i
  kill -TERM "$pid" 2>/dev/null || true
  for ((i = 0; i < STOP_TIMEOUT * 10; i++)); do
    broker_pid "$dir" >/dev/null || break
    sleep 0.1
  done
  if broker_pid "$dir" >/dev/null; then
    log "broker pid $pid still alive after ${STOP_TIMEOUT}s, sending SIGKILL"
    kill -KILL "$pid" 2>/dev/null || true
    for ((i = 0; i < 100; i++)); do
      broker_pid "$dir" >/dev/null || break
      sleep 0.1
    done
  fi
  rm -f "$dir/broker.pid"
}

# ---------------------------------------------------------------- commands

cmd_start() {
  local dir; dir="$(abs_dir "${1:-}")"
  need_tools
  if broker_pid "$dir" >/dev/null; then
    die "a broker is already running in $dir (pid $(cat "$dir/broker.pid")); use stop or restart"
  fi
  if [[ -e "$dir/kraft-data" || -e "$dir/server.properties" ]]; then
    die "$dir already holds a broker's files; use 'restart $dir' to reuse them, or a new DIR"
  fi
  cmd_install quiet
  local port cport cid
  read -r port cport <<<"$(python3 "$PROBE" free-ports 2)"
  [[ -n "$port" && -n "$cport" ]] || die "could not pick free ports"
  write_log4j "$dir"
  write_server_properties "$dir" "$port" "$cport"
  echo "127.0.0.1:$port" >"$dir/bootstrap"
  cid="$(python3 "$PROBE" cluster-id)"
  echo "$cid" >"$dir/cluster.id"
  log "formatting $dir/kraft-data (cluster id $cid, broker port $port, controller port $cport)"
  if ! tool_java "$dir" "$MAIN_STORAGE" format --standalone \
        --cluster-id "$cid" --config "$dir/server.properties" >"$dir/format.log" 2>&1; then
    cat "$dir/format.log" >&2 || true
    die "storage format failed (see $dir/format.log)"
  fi
  launch_and_wait "$dir"
}

cmd_restart() {
  local dir; dir="$(abs_dir "${1:-}")"
  need_tools
  [[ -f "$dir/server.properties" && -f "$dir/bootstrap" && -d "$dir/kraft-data" ]] ||
    die "$dir has no broker to restart (run 'start $dir' first)"
  local pid
  if pid="$(broker_pid "$dir")"; then
    log "broker pid $pid still running in $dir, stopping it first"
    stop_pid "$dir" "$pid"
  fi
  cmd_install quiet
  write_log4j "$dir"  # script-owned, so refreshed; server.properties is kept as is
  launch_and_wait "$dir"
}

cmd_stop() {
  local dir="${1:-}"
  [[ -n "$dir" ]] || die "missing DIR argument"
  [[ -d "$dir" ]] || { log "no $dir, nothing to stop"; return 0; }
  dir="$(cd "$dir" && pwd)"
  local pid
  if ! pid="$(broker_pid "$dir")"; then
    rm -f "$dir/broker.pid"
    log "no broker running in $dir"
    return 0
  fi
  log "stopping broker pid $pid"
  stop_pid "$dir" "$pid"
  log "broker stopped"
}

running_bootstrap() {  # running_bootstrap DIR -> bootstrap of a live broker
  local dir="$1"
  [[ -f "$dir/bootstrap" ]] || die "$dir has no bootstrap file (no broker started there)"
  broker_pid "$dir" >/dev/null || die "no broker running in $dir"
  cat "$dir/bootstrap"
}

cmd_create_topic() {
  [[ $# -ge 3 ]] || die "usage: create-topic DIR NAME PARTITIONS [extra kafka-topics args...]"
  local dir; dir="$(abs_dir "$1")"
  local name="$2" parts="$3"; shift 3
  [[ "$parts" =~ ^[1-9][0-9]*$ ]] || die "PARTITIONS must be a positive integer, got '$parts'"
  need_tools
  local bootstrap; bootstrap="$(running_bootstrap "$dir")"
  cmd_install quiet
  tool_java "$dir" "$MAIN_TOPICS" --bootstrap-server "$bootstrap" --create --if-not-exists \
    --topic "$name" --partitions "$parts" --replication-factor 1 "$@" >&2 ||
    die "creating topic $name failed"
  python3 "$PROBE" wait-topic "$bootstrap" "$name" "$parts" 30 ||
    die "topic $name is not ready with $parts partitions (it may already exist with another count)"
  log "topic $name ready with $parts partitions"
}

cmd_list_topics() {
  local dir; dir="$(abs_dir "${1:-}")"
  need_tools
  local bootstrap; bootstrap="$(running_bootstrap "$dir")"
  cmd_install quiet
  tool_java "$dir" "$MAIN_TOPICS" --bootstrap-server "$bootstrap" --list
}

cmd_acls() {
  local dir; dir="$(abs_dir "${1:-}")"
  shift || true
  need_tools
  local bootstrap; bootstrap="$(running_bootstrap "$dir")"
  cmd_install quiet
  tool_java "$dir" "$MAIN_ACLS" --bootstrap-server "$bootstrap" "$@" >&2 ||
    die "the ACL tool failed (does the broker run an authorizer?)"
}

cmd_status() {
  local dir; dir="$(abs_dir "${1:-}")"
  local bootstrap; bootstrap="$(running_bootstrap "$dir")"
  python3 "$PROBE" wait-ready "$bootstrap" 5 "$(cat "$dir/broker.pid")"
}

main() {
  local cmd="${1:-}"
  [[ $# -gt 0 ]] && shift
  case "$cmd" in
    install) cmd_install ;;
    start) cmd_start "$@" ;;
    restart) cmd_restart "$@" ;;
    stop) cmd_stop "$@" ;;
    create-topic) cmd_create_topic "$@" ;;
    list-topics) cmd_list_topics "$@" ;;
    acls) cmd_acls "$@" ;;
    status) cmd_status "$@" ;;
    bootstrap) [[ -n "${1:-}" && -f "$1/bootstrap" ]] || die "no bootstrap file in '${1:-}'"; cat "$1/bootstrap" ;;
    *) sed -n '2,/^$/p' "${BASH_SOURCE[0]}" | sed 's/^# \{0,1\}//' >&2; exit 2 ;;
  esac
}

main "$@"
