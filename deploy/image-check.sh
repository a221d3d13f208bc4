#!/usr/bin/env bash
# Build the knotwork container image and prove that it runs.
#
#   sudo bash deploy/image-check.sh        (as root, on a Debian machine; `make image-check`)
#
# Steps, each timed: install podman/buildah/debootstrap from the distribution if missing; make a
# local Debian base image (no container registry is needed); build deploy/Containerfile on it;
# run the image on a loopback port with a read-only root filesystem, a tmpfs for /tmp, no
# capabilities and a mounted tokens file; check health, readiness, metrics, a real assessment
# (200), a request without a token (401) and bad requests (problem+json 4xx); check that the
# process runs as the image's non-root user and that the root filesystem is read-only; stop the
# container by its id and remove every piece of container state this script made.
#
# All container state lives in one private folder (storage, run files, networks, events) that is
# removed at the end; the system's default container storage is never touched.
#
# Environment (all optional):
#   KNOTWORK_IMAGE_SUITE     Debian suite of the local base (default bookworm)
#   KNOTWORK_IMAGE_MIRROR    Debian mirror (default: the first one in this machine's apt sources)
#   KNOTWORK_IMAGE_MAX_MB    fail when the image is larger (default 480, the goal: a guard
#                            against a GPU stack, the dev extras or a pruning step lost)
#   KNOTWORK_IMAGE_WORKERS   KNOTWORK_WORKERS inside the checked container (default 2)
#   KNOTWORK_IMAGE_KEEP=1    keep the private folder (and its images) for inspection
#   KNOTWORK_IMAGE_STATE=DIR reuse a folder kept that way (its base image is not made again)
set -euo pipefail

here=$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)
repo=$(dirname "$here")
suite=${KNOTWORK_IMAGE_SUITE:-bookworm}
max_mb=${KNOTWORK_IMAGE_MAX_MB:-480}
goal_mb=480
workers=${KNOTWORK_IMAGE_WORKERS:-2}
base_image=localhost/knotwork-base:$suite
app_image=localhost/knotwork:check
ca_bundle=/etc/ssl/certs/ca-certificates.crt
image_uid=10001

if [ "$(id -u)" -ne 0 ]; then
    echo "image-check: must run as root (it installs packages and runs podman as root)" >&2
    exit 2
fi

now_ms() { date +%s%3N; }
fmt_s() { printf '%d.%01d s' $(($1 / 1000)) $((($1 % 1000) / 100)); }
t_all=$(now_ms)
step() {
    local name=$1 t0
    shift
    t0=$(now_ms)
    echo "== $name"
    "$@"
    echo "-- $name: $(fmt_s $(($(now_ms) - t0)))"
}
fail() {
    echo "image-check: FAIL: $*" >&2
    exit 1
}

state=""
cid=""
# podman and buildah keep two small things outside any configurable storage: a blob-info cache
# (/var/lib/containers/cache) and netavark's run folder (/run/containers). What of them did not
# exist before is removed again at the end.
leftovers=()
for d in /var/lib/containers /run/containers; do
    [ -e "$d" ] || leftovers+=("$d")
done
cleanup() {
    local rc=$?
    set +e
    if [ -n "$cid" ]; then
        # Only the container this script started, by its id.
        podman stop --time 5 "$cid" >/dev/null 2>&1
        podman rm --force "$cid" >/dev/null 2>&1
    fi
    if [ -n "$state" ] && [ -d "$state" ]; then
        if [ "${KNOTWORK_IMAGE_KEEP:-0}" = 1 ]; then
            echo "image-check: kept $state (source $state/env to use its podman storage)"
        else
            local t0
            t0=$(now_ms)
            podman rmi --force "$app_image" "$base_image" >/dev/null 2>&1
            # The overlay driver may leave mounts of its own under the folder: undo them first.
            findmnt -rn -o TARGET | grep -F "$state/" | sort -r | while read -r m; do
                umount "$m" 2>/dev/null || umount -l "$m"
            done
            rm -rf "$state"
            [ ${#leftovers[@]} -eq 0 ] || rm -rf "${leftovers[@]}"
            echo "-- cleanup (storage removed): $(fmt_s $(($(now_ms) - t0)))"
        fi
    fi
    if [ "$rc" -eq 0 ]; then
        echo "image-check: OK in $(fmt_s $(($(now_ms) - t_all)))"
    else
        echo "image-check: failed (status $rc) after $(fmt_s $(($(now_ms) - t_all)))" >&2
    fi
    exit "$rc"
}
trap cleanup EXIT
trap 'exit 130' INT TERM

install_tools() {
    local need=() pair
    for pair in podman:podman buildah:buildah runc:runc fuse-overlayfs:fuse-overlayfs \
        newuidmap:uidmap slirp4netns:slirp4netns debootstrap:debootstrap curl:curl; do
        command -v "${pair%%:*}" >/dev/null 2>&1 || need+=("${pair#*:}")
    done
    if [ ${#need[@]} -eq 0 ]; then
        echo "all present: $(podman --version), $(buildah --version | cut -d' ' -f1-3)"
        return
    fi
    echo "installing: ${need[*]}"
    apt-get update -qq
    DEBIAN_FRONTEND=noninteractive apt-get install -y -qq podman buildah runc fuse-overlayfs \
        uidmap slirp4netns debootstrap curl >/dev/null
}

# The Debian mirror this machine already uses (deb822 .sources files or one-line sources.list).
apt_mirror() {
    local m=""
    if compgen -G '/etc/apt/sources.list.d/*.sources' >/dev/null; then
        m=$(awk -v suite="$suite" '
            FNR == 1 || /^[[:space:]]*$/ {
                if (uris != "" && ok) { print uris; exit }
                uris = ""; ok = 0
            }
            /^URIs:/ { uris = $2 }
            /^Suites:/ { for (i = 2; i <= NF; i++) if ($i == suite) ok = 1 }
            END { if (uris != "" && ok) print uris }' /etc/apt/sources.list.d/*.sources | head -1)
    fi
    if [ -z "$m" ] && [ -f /etc/apt/sources.list ]; then
        m=$(sed -E 's/\[[^]]*\]//' /etc/apt/sources.list |
            awk -v suite="$suite" '$1 == "deb" && $3 == suite { print $2; exit }')
    fi
    if [ -z "$m" ]; then
        # No source for this suite (another release than the host's): the host's main mirror.
        m=$(cat /etc/apt/sources.list.d/*.sources /etc/apt/sources.list 2>/dev/null |
            sed -E 's/\[[^]]*\]//' | awk '
                /^URIs:/ && $2 !~ /security/ { print $2; exit }
                $1 == "deb" && $2 !~ /security/ { print $2; exit }')
    fi
    echo "${m:-http://deb.debian.org/debian}"
}

make_state() {
    if [ -n "${KNOTWORK_IMAGE_STATE:-}" ]; then
        state=$KNOTWORK_IMAGE_STATE
        case "$state" in /tmp/knotwork-image-check.*) ;; *) fail "KNOTWORK_IMAGE_STATE: not ours" ;; esac
        [ -d "$state" ] || fail "KNOTWORK_IMAGE_STATE: no such folder"
    else
        state=$(mktemp -d /tmp/knotwork-image-check.XXXXXX)
    fi
    # libpod's folder gets a short name: slirp4netns's socket path in it (a 64-digit container
    # id follows) must stay under 108 characters.
    mkdir -p "$state"/{graph,run,l,networks,volumes,tmp}
    cat >"$state/storage.conf" <<EOF
[storage]
driver = "overlay"
runroot = "$state/run"
graphroot = "$state/graph"
EOF
    # runc: the default crun fails on this kind of host (cgroups in hybrid mode); the ulimits
    # podman asks for by default are above what the sandbox allows (setrlimit fails).
    cat >"$state/containers.conf" <<EOF
[containers]
default_ulimits = ["nofile=20000:20000", "nproc=32768:32768"]
# No network unless asked for: the one container that needs one gets slirp4netns (below).
netns = "none"

[engine]
runtime = "runc"
cgroup_manager = "cgroupfs"
events_logger = "file"
events_logfile_path = "$state/events.log"
tmp_dir = "$state/l"
volume_path = "$state/volumes"

[network]
network_config_dir = "$state/networks"
EOF
    # pip settings for the build only (the "pipconf" build secret, never in a layer): the host's
    # CA bundle, and the host's index when it is an http(s) one.
    local index
    index=$(python3 -m pip config get global.index-url 2>/dev/null || true)
    {
        echo "[global]"
        echo "cert = $ca_bundle"
        echo "timeout = 120"
        case "$index" in http://* | https://*) echo "index-url = $index" ;; esac
    } >"$state/pip.conf"
    cat >"$state/env" <<EOF
export CONTAINERS_STORAGE_CONF=$state/storage.conf
export CONTAINERS_CONF=$state/containers.conf
export TMPDIR=$state/tmp
EOF
    # shellcheck disable=SC1091
    . "$state/env"
    echo "private folder: $state"
}

make_base() {
    local mirror rootfs=$state/rootfs
    if podman image exists "$base_image"; then
        echo "reusing $base_image from $state"
        return
    fi
    mirror=${KNOTWORK_IMAGE_MIRROR:-$(apt_mirror)}
    echo "debootstrap $suite from $mirror"
    debootstrap --variant=minbase --include=python3,python3-venv,ca-certificates \
        "$suite" "$rootfs" "$mirror" >"$state/debootstrap.log" 2>&1 ||
        { tail -20 "$state/debootstrap.log"; fail "debootstrap"; }
    # What a slim base leaves out too: package caches and lists, the package tools' backup
    # copies of their databases, manual pages, translations and documentation (the copyright
    # files stay).
    rm -rf "$rootfs"/var/cache/apt/archives/*.deb "$rootfs"/var/cache/apt/*.bin \
        "$rootfs"/var/lib/apt/lists/* "$rootfs"/var/log/* "$rootfs"/usr/share/man/* \
        "$rootfs"/usr/share/info/* "$rootfs"/usr/share/locale/* "$rootfs"/usr/share/lintian \
        "$rootfs"/var/cache/debconf/*-old "$rootfs"/var/lib/dpkg/*-old
    find "$rootfs/usr/share/doc" -mindepth 1 ! -type d ! -name copyright -delete
    find "$rootfs/usr/share/doc" -mindepth 1 -type d -empty -delete
    tar -C "$rootfs" -c . | podman import --quiet \
        --change 'ENV PATH=/usr/local/sbin:/usr/local/bin:/usr/sbin:/usr/bin:/sbin:/bin' \
        --change 'ENV LANG=C.UTF-8' --change 'CMD ["/bin/bash"]' - "$base_image" >/dev/null
    rm -rf "$rootfs"
    podman run --rm --no-healthcheck "$base_image" python3 --version
}

build_image() {
    # chroot isolation shares the host's network, so pip in RUN steps reaches the index. The
    # host's CA bundle is bind-mounted over the base's own for the build only (mounting over an
    # existing file leaves no trace); pip.conf goes in as a build secret, for the download only.
    buildah bud --isolation chroot --network host --format docker --pull=never \
        --build-arg BASE_IMAGE="$base_image" \
        --ignorefile "$here/Containerfile.dockerignore" \
        -v "$ca_bundle:$ca_bundle:ro" --secret "id=pipconf,src=$state/pip.conf" \
        -f "$here/Containerfile" -t "$app_image" "$repo" >"$state/build.log" 2>&1 ||
        { tail -40 "$state/build.log"; fail "build"; }
    grep -E '^(STEP|COMMIT|Successfully)' "$state/build.log" | tail -3
}

image_facts() {
    local bytes mb base_mb user
    bytes=$(podman image inspect --format '{{.Size}}' "$app_image")
    mb=$((bytes / 1000000))
    base_mb=$(($(podman image inspect --format '{{.Size}}' "$base_image") / 1000000))
    echo "image size: $mb MB uncompressed ($bytes bytes; the base is $base_mb MB, the service's layers $((mb - base_mb)) MB)"
    if [ "$mb" -lt "$goal_mb" ]; then
        echo "size goal (under $goal_mb MB): met"
    else
        echo "size goal (under $goal_mb MB): not met, $((mb - goal_mb)) MB over (limit $max_mb MB)"
    fi
    user=$(podman image inspect --format '{{.Config.User}}' "$app_image")
    echo "image user: $user"
    [ "${user%%:*}" = "$image_uid" ] || fail "image user is '$user', expected $image_uid"
    podman image inspect --format '{{json .Config.Healthcheck}}' "$app_image" | grep -q healthz ||
        fail "image has no HEALTHCHECK against /healthz"
    if podman run --rm --no-healthcheck --entrypoint sh "$app_image" \
        -c 'command -v curl || command -v wget'; then
        fail "curl or wget in the image"
    fi
    if podman run --rm --no-healthcheck --entrypoint sh "$app_image" \
        -c 'test -e /etc/pip.conf || test -e /etc/xdg/pip || test -e /root/.config/pip'; then
        fail "pip configuration from the build is in the image"
    fi
    local venv
    venv=$(podman run --rm --no-healthcheck "$app_image" python -c 'import importlib.metadata as m
names = sorted(d.metadata["Name"].lower() for d in m.distributions())
bad = [n for n in names if n.startswith(("nvidia", "cuda", "torch", "cupy", "pip", "setuptools"))]
print(len(names), "distributions", "bad:" + ",".join(bad) if bad else "clean")')
    echo "venv: $venv"
    echo "largest in the venv (MB): $(podman run --rm --no-healthcheck --entrypoint sh "$app_image" -c \
        'cd "$(python -c "import sysconfig; print(sysconfig.get_path(\"purelib\"))")" &&
         du -sm -- * | sort -rn | head -8 | awk "{printf \"%s %s, \", \$2, \$1}"' |
        sed 's/, $//')"
    case "$venv" in *clean) ;; *) fail "GPU packages or installers in the venv: $venv" ;; esac
    [ "$mb" -lt "$max_mb" ] || fail "image is $mb MB, over $max_mb MB"
}

free_port() {
    python3 -c 'import socket; s = socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1])'
}

start_container() {
    port=$(free_port)
    token=$(head -c 24 /dev/urandom | od -An -tx1 | tr -d ' \n')
    # Two tokens, as during a rotation; the check uses the second one.
    printf 'old-%s\n%s\n' "$(head -c 12 /dev/urandom | od -An -tx1 | tr -d ' \n')" "$token" \
        >"$state/tokens"
    chmod 0644 "$state/tokens"
    # User-mode networking (slirp4netns) publishes the port on the host's loopback without
    # touching the host's firewall or creating a bridge, so nothing outlives the check.
    # podman reports (harmlessly) that it cannot reach systemd to schedule the image's health
    # check; the check is run by hand below instead. That noise goes to run.err.
    cid=$(podman run -d --read-only --read-only-tmpfs=false \
        --tmpfs /tmp:rw,nosuid,nodev,size=64m \
        --cap-drop=ALL --security-opt=no-new-privileges \
        --network slirp4netns:port_handler=slirp4netns -p "127.0.0.1:$port:8000" \
        -v "$state/tokens:/run/secrets/knotwork_tokens:ro" \
        -e KNOTWORK_TOKENS_FILE=/run/secrets/knotwork_tokens \
        -e KNOTWORK_WORKERS="$workers" \
        -e PROMETHEUS_MULTIPROC_DIR=/tmp/knotwork-metrics \
        -e KNOTWORK_LOG_LEVEL=info \
        "$app_image" 2>"$state/run.err") || { cat "$state/run.err"; fail "podman run"; }
    echo "container ${cid:0:12} on 127.0.0.1:$port (workers $workers)"
}

# wait_for ROUTE: poll the route until it answers 200 (60 s at most); fail, with the
# container's last log lines, if it does not or the container stops first. /healthz answers as
# soon as the server listens; /readyz once each worker has warmed up, as a load balancer waits.
wait_for() {
    local route=$1 i code=""
    for i in $(seq 1 120); do
        code=$(curl -s -o /dev/null -w '%{http_code}' --max-time 2 "http://127.0.0.1:$port$route" || true)
        if [ "$code" = 200 ]; then
            echo "$route answered 200 after $i tries"
            return
        fi
        if [ "$(podman inspect --format '{{.State.Running}}' "$cid")" != true ]; then
            podman logs "$cid" 2>&1 | tail -30
            fail "container exited before $route answered 200"
        fi
        sleep 0.5
    done
    podman logs "$cid" 2>&1 | tail -30
    fail "$route did not answer 200 within 60 s (last: $code)"
}

# request NAME EXPECTED_STATUS EXPECTED_TYPE_PREFIX curl-args...
request() {
    local name=$1 want=$2 want_type=$3 out got type
    shift 3
    out=$state/$name.body
    read -r got type < <(curl -sS -o "$out" -w '%{http_code} %{content_type}\n' --max-time 30 "$@")
    echo "$name: $got $type ($(wc -c <"$out") bytes)"
    [ "$got" = "$want" ] || { head -c 600 "$out"; echo; fail "$name: status $got, expected $want"; }
    case "$type" in "$want_type"*) ;; *) fail "$name: content type '$type', expected $want_type" ;; esac
}

problem_ok() {
    # A problem+json document (RFC 9457) whose status matches and that names what is wrong.
    python3 - "$1" "$2" <<'EOF'
import json, sys
doc = json.load(open(sys.argv[1]))
assert doc.get("status") == int(sys.argv[2]), doc
assert doc.get("title") and doc.get("type"), doc
print("   problem:", doc.get("title"), "|", (doc.get("errors") or [{}])[0])
EOF
}

check_service() {
    local url=http://127.0.0.1:$port auth=(-H "Authorization: Bearer $token")
    local good='{"input": {"kind": "correlation", "names": ["a", "b", "c"], "matrix": [[1, 0.5, 0.2], [0.5, 1, 0.3], [0.2, 0.3, 1]], "n": 50}}'
    local few='{"input": {"kind": "correlation", "names": ["a", "b", "c"], "matrix": [[1, 0.5, 0.2], [0.5, 1, 0.3], [0.2, 0.3, 1]], "n": 3}}'
    request readyz 200 "" "$url/readyz"
    request assess 200 application/json "${auth[@]}" -H 'Content-Type: application/json' \
        --data-binary "$good" "$url/v1/assess"
    python3 - "$state/assess.body" <<'EOF'
import json, math, sys
doc = json.load(open(sys.argv[1]))
names = [v["name"] for v in doc["variables"]]
assert names == ["a", "b", "c"], names
vifs = [v["vif"] for v in doc["variables"]]
assert all(isinstance(x, (int, float)) and math.isfinite(x) and x >= 1 for x in vifs), vifs
print("   vif:", ", ".join(f"{n}={x:.4f}" for n, x in zip(names, vifs)))
EOF
    # The report, in the running image (read-only root: matplotlib keeps its font list in /tmp).
    request report 200 text/html "${auth[@]}" -H 'Content-Type: application/json' \
        --data-binary "$good" "$url/v1/report"
    grep -q '<svg' "$state/report.body" || fail "the report has no chart"
    if grep -q '://' "$state/report.body"; then fail "the report names a place outside itself"; fi
    request no-token 401 application/problem+json -H 'Content-Type: application/json' \
        --data-binary "$good" "$url/v1/assess"
    problem_ok "$state/no-token.body" 401
    request malformed 400 application/problem+json "${auth[@]}" \
        -H 'Content-Type: application/json' --data-binary '{"input": {"kind": ' "$url/v1/assess"
    problem_ok "$state/malformed.body" 400
    request too-few-rows 422 application/problem+json "${auth[@]}" \
        -H 'Content-Type: application/json' --data-binary "$few" "$url/v1/assess"
    problem_ok "$state/too-few-rows.body" 422
    request metrics 200 text/plain "$url/metrics"
    # The offline docs page and every asset it links, from the image's own files.
    request docs 200 text/html "$url/docs"
    local links link n=0
    links=$(grep -o -E '(src|href)="[^"]*"' "$state/docs.body" | sed -E 's/^[a-z]+="(.*)"$/\1/')
    for link in $links; do
        case "$link" in /*) ;; *) fail "the docs page links $link, which this service does not serve" ;; esac
        request docs-asset 200 "" "$url$link"
        [ "$(wc -c <"$state/docs-asset.body")" -gt 1000 ] || fail "docs asset $link is nearly empty"
        n=$((n + 1))
    done
    [ "$n" -ge 3 ] || fail "the docs page links $n assets, expected its CSS, bundle and preset"
}

check_inside() {
    local uids
    # The service's own process (pid 1 is the start script's exec), as the kernel sees it.
    uids=$(podman exec "$cid" python -c 'print(*[l.split()[1:] for l in open("/proc/1/status") if l.startswith(("Uid", "Gid"))])')
    echo "pid 1 uid/gid (real, effective, saved, fs): $uids"
    case "$uids" in *"'0'"*) fail "a process id of pid 1 is root" ;; esac
    case "$uids" in *"'$image_uid'"*) ;; *) fail "pid 1 does not run as $image_uid" ;; esac
    if podman exec "$cid" sh -c 'echo x > /opt/knotwork/probe' 2>/dev/null; then
        fail "the root filesystem is writable"
    fi
    echo "root filesystem: read-only"
    podman exec "$cid" sh -c 'echo x > /tmp/probe && rm /tmp/probe' || fail "/tmp is not writable"
    if podman healthcheck run "$cid"; then
        echo "image HEALTHCHECK: healthy"
    else
        fail "the image's HEALTHCHECK command failed"
    fi
    # Resident memory of each process after the requests: the per-worker baseline for sizing.
    podman exec "$cid" python -c 'import os
for pid in sorted((d for d in os.listdir("/proc") if d.isdigit()), key=int):
    if int(pid) == os.getpid():
        continue
    try:
        cmd = open(f"/proc/{pid}/cmdline", "rb").read().replace(b"\0", b" ").decode()[:60]
        mem = dict(l.split(":", 1) for l in open(f"/proc/{pid}/status"))
    except OSError:
        continue
    if "VmRSS" in mem and "python" in cmd:
        rss, hwm = (int(mem[k].split()[0]) // 1024 for k in ("VmRSS", "VmHWM"))
        print(f"memory: pid {pid}: {rss} MB resident (peak {hwm} MB): {cmd}")'
    if podman logs "$cid" 2>&1 | grep -q -F "$token"; then
        fail "the token appears in the container's log"
    fi
    echo "log: $(podman logs "$cid" 2>&1 | wc -l) lines, no token in them"
}

stop_container() {
    local code
    podman stop --time 20 "$cid" >/dev/null 2>>"$state/run.err"
    code=$(podman inspect --format '{{.State.ExitCode}}' "$cid")
    echo "stopped ${cid:0:12}: exit code $code"
    podman logs "$cid" 2>&1 | tail -3
    podman rm "$cid" >/dev/null 2>>"$state/run.err"
    cid=""
    # 137 means it ignored SIGTERM for 20 s and was killed.
    [ "$code" != 137 ] || fail "the service did not stop on SIGTERM"
}

step "install tools" install_tools
step "private container storage" make_state
step "local base image" make_base
step "build image" build_image
step "image facts" image_facts
step "start container" start_container
step "wait for /healthz" wait_for /healthz
step "wait for /readyz" wait_for /readyz
step "requests" check_service
step "inside the container" check_inside
step "stop by id" stop_container
