#!/usr/bin/python3
"""The README's cluster recipes run as written (issue #17 scope 3; README,
"LCO sweeps": the blocks after `<!-- recipe: slurm ... -->` and
`<!-- recipe: parallel ... -->`).

Each recipe is taken verbatim from README.md and run with /bin/sh -e in a
temporary folder holding a copy of cases/demo_aileron.toml at the path the
recipe names, with the program under test first on PATH. The merged map must
equal the unsharded run of the same sweep (the `aerosect sweep` command of
the recipe without --shard, --jobs and -o) dataset by dataset and attribute
by attribute (files.same_files, as the shard test in test_cli.py).

slurm: a single-node Slurm cluster from Debian's packages is started for the
  test only, as children of this script: munged (its own key, socket, pid,
  log and seed files in the temporary folder), slurmctld -D and slurmd -D
  with a minimal slurm.conf written here (this host's short name, its usable
  CPUs, free TCP ports, state and spool folders in the temporary folder,
  proctrack/linuxproc and task/none, so no cgroup is needed). The client
  commands find it through SLURM_CONF. The test waits for the node to be
  idle, runs the recipe, waits for the queue to empty and compares. The
  daemons are always stopped by process id (SIGTERM, then SIGKILL after
  5 s) and the folder removed.
parallel: GNU parallel runs the recipe on this machine.

Skips (exit 77, the reason printed) when a needed program is missing, when
the Slurm daemons need root and this is not root, or when a daemon cannot
start here (the reason from its log). A recipe that fails once the cluster
is up is a failure, never a skip.

Usage: test_cluster_recipes.py AEROSECT SOURCE_DIR {slurm|parallel}
"""
import os
import re
import shlex
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from files import same_files  # noqa: E402

EXE, SRC, MODE = os.path.abspath(sys.argv[1]), sys.argv[2], sys.argv[3]
SKIP = 77
SBIN = "/usr/sbin:/sbin"
failures = []


def check(what, cond, detail=""):
    print(("ok   " if cond else "FAIL ") + what + ("" if cond else f": {detail}"))
    if not cond:
        failures.append(what)


def skip(why):
    print(f"SKIP {MODE} recipe: {why}")
    sys.exit(SKIP)


def recipe(name):
    """The shell text of the README block marked `<!-- recipe: NAME ... -->`."""
    with open(os.path.join(SRC, "README.md"), encoding="utf-8") as f:
        text = f.read()
    m = re.search(r"<!-- recipe: " + re.escape(name) + r"\b[^>]*-->\n```sh\n(.*?)```", text, re.S)
    if not m:
        print(f"FAIL README.md has no block marked '<!-- recipe: {name} -->' followed by ```sh")
        sys.exit(1)
    return m.group(1)


def sweep_of(text):
    """The recipe's `aerosect sweep` command as arguments, without --shard,
    --jobs and -o (they only split the work and name the file)."""
    joined = text.replace("\\\n", " ")
    m = re.search(r"aerosect sweep (.*)", joined)
    words = shlex.split(m.group(1).split(":::")[0])
    args, i = [], 0
    while i < len(words):
        if words[i] in ("--shard", "--jobs", "-o", "--output"):
            i += 2
            continue
        args.append(words[i])
        i += 1
    return args


def log_tail(path, n=15):
    try:
        with open(path, errors="replace") as f:
            return "".join(f.readlines()[-n:])
    except OSError:
        return f"({path} not written)"


def compare(tmp, text):
    """Unsharded run of the recipe's sweep against the recipe's map.h5."""
    args = sweep_of(text)
    full = os.path.join(tmp, "unsharded.h5")
    r = subprocess.run([EXE, "sweep", *args, "-o", full], cwd=tmp, capture_output=True,
                       text=True, timeout=300)
    check("unsharded run of the same sweep (" + " ".join(args) + ")", r.returncode == 0, r.stderr)
    parts = sorted(f for f in os.listdir(tmp) if re.fullmatch(r"map\.part\d+\.h5", f))
    check("4 shard files written", len(parts) == 4, parts)
    merged = os.path.join(tmp, "map.h5")
    check("map.h5 written by the recipe", os.path.exists(merged))
    if os.path.exists(merged) and r.returncode == 0:
        check("merged map equals the unsharded run (every dataset and attribute)",
              *same_files(full, merged))


def setup(tmp):
    """The demo case at the path the recipes name; the program first on PATH."""
    os.makedirs(os.path.join(tmp, "cases"))
    shutil.copy(os.path.join(SRC, "cases", "demo_aileron.toml"), os.path.join(tmp, "cases"))
    if os.path.basename(EXE) != "aerosect":
        print(f"FAIL the recipes call `aerosect`; the program under test is {EXE}")
        sys.exit(1)
    env = dict(os.environ)
    env["PATH"] = os.path.dirname(EXE) + os.pathsep + env.get("PATH", "")
    return env


def run_recipe(tmp, text, env, timeout):
    path = os.path.join(tmp, "recipe.sh")
    with open(path, "w") as f:
        f.write(text)
    t0 = time.monotonic()
    r = subprocess.run(["/bin/sh", "-e", path], cwd=tmp, env=env, capture_output=True,
                       text=True, timeout=timeout)
    print(f"recipe ran in {time.monotonic() - t0:.1f} s, exit {r.returncode}")
    check("recipe exits 0", r.returncode == 0, r.stdout + r.stderr)
    return r


# ---------------------------------------------------------------- parallel --
def test_parallel():
    text = recipe("parallel")
    exe = shutil.which("parallel")
    if not exe:
        skip("GNU parallel is not installed (Debian package parallel)")
    v = subprocess.run([exe, "--version"], capture_output=True, text=True)
    if "GNU parallel" not in v.stdout:
        skip(f"{exe} is not GNU parallel (moreutils' parallel takes other arguments)")
    with tempfile.TemporaryDirectory() as tmp:
        env = setup(tmp)
        # GNU parallel asks once per user to be cited unless told it will be;
        # its own folder in the temporary one keeps the user's untouched.
        env["PARALLEL_HOME"] = os.path.join(tmp, ".parallel")
        os.makedirs(env["PARALLEL_HOME"])
        open(os.path.join(env["PARALLEL_HOME"], "will-cite"), "w").close()
        run_recipe(tmp, text, env, 120)
        compare(tmp, text)


# ------------------------------------------------------------------- slurm --
def free_port():
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class Daemons:
    """Child processes stopped by process id, last started first."""

    def __init__(self):
        self.procs = []

    def start(self, name, argv, log, env):
        out = open(log, "w")
        p = subprocess.Popen(argv, stdout=out, stderr=subprocess.STDOUT, env=env,
                             stdin=subprocess.DEVNULL)
        out.close()
        print(f"started {name} (pid {p.pid}): {' '.join(argv)}")
        self.procs.append((name, p))
        return p

    def stop(self):
        for name, p in reversed(self.procs):
            if p.poll() is None:
                os.kill(p.pid, signal.SIGTERM)
        deadline = time.monotonic() + 5
        for name, p in reversed(self.procs):
            try:
                p.wait(max(0.0, deadline - time.monotonic()))
            except subprocess.TimeoutExpired:
                print(f"{name} (pid {p.pid}) ignored SIGTERM for 5 s: SIGKILL")
                os.kill(p.pid, signal.SIGKILL)
                p.wait()
        self.procs = []


def wait_for(what, cond, timeout, daemons, logs):
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        for name, p in daemons.procs:
            if p.poll() is not None:
                skip(f"{name} exited ({p.returncode}) before {what}; its log ends:\n"
                     + log_tail(logs[name]))
        if cond():
            return
        time.sleep(0.2)
    skip(f"no {what} after {timeout} s; logs:\n"
         + "\n".join(f"--- {n}\n{log_tail(path)}" for n, path in logs.items()))


def slurm_conf(tmp, host, cpus):
    return f"""# Written by tests/integration/test_cluster_recipes.py for one test run.
ClusterName=aerosecttest
SlurmctldHost={host}(127.0.0.1)
SlurmctldPort={free_port()}
SlurmdPort={free_port()}
SlurmUser=root
SlurmdUser=root
AuthType=auth/munge
CredType=cred/munge
AuthInfo=socket={tmp}/munge/munge.socket
StateSaveLocation={tmp}/state
SlurmdSpoolDir={tmp}/spool
SlurmctldPidFile={tmp}/slurmctld.pid
SlurmdPidFile={tmp}/slurmd.pid
SlurmctldLogFile={tmp}/slurmctld.log
SlurmdLogFile={tmp}/slurmd.log
SlurmctldDebug=info
SlurmdDebug=info
MailProg=/bin/true
SchedulerType=sched/builtin
SelectType=select/cons_tres
SelectTypeParameters=CR_CPU
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
MpiDefault=none
ReturnToService=2
NodeName={host} NodeAddr=127.0.0.1 CPUs={cpus} State=UNKNOWN
PartitionName=test Nodes={host} Default=YES MaxTime=INFINITE State=UP
"""


def test_slurm():
    text = recipe("slurm")
    path = os.environ.get("PATH", "") + os.pathsep + SBIN
    need = {"munged": "munge", "munge": "munge", "slurmctld": "slurmctld", "slurmd": "slurmd",
            "sbatch": "slurm-client", "squeue": "slurm-client", "sinfo": "slurm-client",
            "scancel": "slurm-client"}
    exes = {c: shutil.which(c, path=path) for c in need}
    missing = sorted({need[c] for c, e in exes.items() if not e})
    if missing:
        skip("not installed: Debian packages " + ", ".join(missing))
    if os.geteuid() != 0:
        skip("slurmd starts jobs as the submitting user and must run as root; "
             f"this test runs as uid {os.geteuid()}")
    host = socket.gethostname().split(".")[0]
    cpus = len(os.sched_getaffinity(0))
    daemons = Daemons()
    env = dict(os.environ)
    with tempfile.TemporaryDirectory() as tmp:
        # munged refuses a socket whose folders not everyone can enter.
        os.chmod(tmp, 0o755)
        previous_term = signal.signal(signal.SIGTERM, lambda *_: sys.exit(143))
        try:
            for d in ("munge", "state", "spool"):
                os.makedirs(os.path.join(tmp, d))
            os.chmod(os.path.join(tmp, "munge"), 0o755)
            key = os.path.join(tmp, "munge", "munge.key")
            with open(key, "wb") as f:
                f.write(os.urandom(1024))
            os.chmod(key, 0o400)
            conf = os.path.join(tmp, "slurm.conf")
            with open(conf, "w") as f:
                f.write(slurm_conf(tmp, host, cpus))
            env = setup(tmp)
            env["SLURM_CONF"] = conf
            sock = os.path.join(tmp, "munge", "munge.socket")
            logs = {"munged": os.path.join(tmp, "munged.out"),
                    "slurmctld": os.path.join(tmp, "slurmctld.out"),
                    "slurmd": os.path.join(tmp, "slurmd.out")}

            daemons.start("munged", [exes["munged"], "--foreground", f"--socket={sock}",
                                     f"--key-file={key}", f"--log-file={tmp}/munge/munged.log",
                                     f"--pid-file={tmp}/munge/munged.pid",
                                     f"--seed-file={tmp}/munge/munged.seed"],
                          logs["munged"], env)

            def munge_works():
                enc = subprocess.run([exes["munge"], "-n", "-S", sock], capture_output=True)
                return enc.returncode == 0
            wait_for("a working munge socket", munge_works, 15, daemons, logs)

            # In the foreground each also writes its log to stderr: the .out files.
            daemons.start("slurmctld", [exes["slurmctld"], "-D", "-f", conf],
                          logs["slurmctld"], env)
            daemons.start("slurmd", [exes["slurmd"], "-D", "-f", conf], logs["slurmd"], env)

            def node_idle():
                r = subprocess.run([exes["sinfo"], "-h", "-n", host, "-o", "%T"], env=env,
                                   capture_output=True, text=True)
                return r.returncode == 0 and r.stdout.strip() == "idle"
            t0 = time.monotonic()
            wait_for(f"node {host} idle in sinfo", node_idle, 30, daemons, logs)
            print(f"single-node Slurm up in {time.monotonic() - t0:.1f} s "
                  f"(node {host}, {cpus} CPUs)")

            run_recipe(tmp, text, env, 60)

            def queue():
                r = subprocess.run([exes["squeue"], "-h", "-o", "%i %j %T %r"], env=env,
                                   capture_output=True, text=True)
                return r.stdout.strip().splitlines()
            deadline = time.monotonic() + 90
            jobs = queue()
            while jobs and time.monotonic() < deadline:
                if any("DependencyNeverSatisfied" in j for j in jobs):
                    break
                time.sleep(0.5)
                jobs = queue()
            print(f"queue empty {time.monotonic() - t0:.1f} s after the daemons started")
            logs_text = "\n".join(f"--- {f}\n{log_tail(os.path.join(tmp, f))}"
                                  for f in sorted(os.listdir(tmp)) if f.endswith(".log"))
            check("every job of the recipe ended (queue empty)", not jobs,
                  "\n".join(jobs) + "\n" + logs_text)
            merge_log = log_tail(os.path.join(tmp, "merge.log"))
            check("merge job's log says 4 shards merged", "merged 4 shard files" in merge_log,
                  merge_log)
            compare(tmp, text)
        finally:
            # Jobs left by a failure first (slurmd's job steps are not our
            # children), then the daemons by process id.
            if daemons.procs and all(p.poll() is None for _, p in daemons.procs):
                ids = subprocess.run([exes["squeue"], "-h", "-o", "%A"], env=env,
                                     capture_output=True, text=True).stdout.split()
                if ids:
                    subprocess.run([exes["scancel"], *ids], env=env)
                    time.sleep(2)
            daemons.stop()
            signal.signal(signal.SIGTERM, previous_term)


if MODE == "slurm":
    test_slurm()
elif MODE == "parallel":
    test_parallel()
else:
    print(f"usage: {sys.argv[0]} AEROSECT SOURCE_DIR {{slurm|parallel}}")
    sys.exit(2)
if failures:
    print(f"{len(failures)} check(s) failed")
    sys.exit(1)
print("all checks passed")
