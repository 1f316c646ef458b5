#!/usr/bin/python3
"""tamis as the tasks of a real Slurm (Debian 12: slurmctld, slurmd, slurm-client).

The test starts its own controller and node daemon (no systemd, no munge:
AuthType=auth/none, CredType=cred/none) with a slurm.conf in a temporary folder,
submits the scan as a 4-task job array, the look-alike join as a 2-task array
that depends on it (afterok), and the merge as a job that depends on the join,
then compares the merge's outputs with one `tamis audit` of the same tree, byte
for byte: on the planted-copy tree (planted_tree.py) and on Fashion-MNIST (Debian
dataset-fashion-mnist). A second merge without join outputs depends on the scan
alone. The daemons are stopped by the PIDs in their pid files, never by name.
Slurm's job states and variables are as its manuals (sbatch(1), squeue(1),
scontrol(1)) describe them.
Usage: slurm_test.py PATH_TO_TAMIS
"""
import os
import re
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
import unittest

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from planted_tree import planted_copy_tree  # noqa: E402

TAMIS = None
OUTPUTS = ("manifest.csv", "report.json", "report.html", "index.cbor")


def free_port():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class Slurm:
    """A controller and one node daemon of our own, in `folder`."""

    def __init__(self, folder):
        self.dir = folder
        host = socket.gethostname().split(".")[0]
        ports = sorted({free_port() for _ in range(3)})[:2]
        for sub in ("state", "spool"):
            os.makedirs(os.path.join(folder, sub))
        self.conf = os.path.join(folder, "slurm.conf")
        d = folder
        with open(self.conf, "w") as f:
            f.write(f"""ClusterName=tamistest
SlurmctldHost={host}(127.0.0.1)
SlurmctldPort={ports[0]}
SlurmdPort={ports[1]}
SlurmUser=root
SlurmdUser=root
AuthType=auth/none
CredType=cred/none
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
SelectType=select/cons_tres
SlurmdParameters=config_overrides
SchedulerParameters=batch_sched_delay=0,sched_min_interval=0
AccountingStorageType=accounting_storage/none
JobAcctGatherType=jobacct_gather/none
MpiDefault=none
ReturnToService=2
SlurmctldPidFile={d}/slurmctld.pid
SlurmdPidFile={d}/slurmd.pid
SlurmctldLogFile={d}/slurmctld.log
SlurmdLogFile={d}/slurmd.log
StateSaveLocation={d}/state
SlurmdSpoolDir={d}/spool
NodeName={host} CPUs={os.cpu_count()} State=UNKNOWN
PartitionName=tamis Nodes={host} Default=YES MaxTime=INFINITE State=UP
""")
        self.env = dict(os.environ, SLURM_CONF=self.conf)
        for k in list(self.env):
            if k.startswith("SLURM_") and k != "SLURM_CONF":
                del self.env[k]

    def start(self):
        subprocess.run(["slurmctld", "-f", self.conf], env=self.env, check=True, timeout=60)
        subprocess.run(["slurmd", "-f", self.conf], env=self.env, check=True, timeout=60)
        deadline = time.time() + 60
        while time.time() < deadline:
            r = subprocess.run(["sinfo", "-h", "-o", "%T"], env=self.env, capture_output=True, text=True)
            if r.returncode == 0 and r.stdout.strip() == "idle":
                return
            time.sleep(0.2)
        raise RuntimeError("the Slurm node did not become idle:\n" + self.logs())

    def stop(self):
        for name in ("slurmd.pid", "slurmctld.pid"):
            path = os.path.join(self.dir, name)
            try:
                with open(path) as f:
                    pid = int(f.read().strip())
            except (OSError, ValueError):
                continue
            try:
                os.kill(pid, signal.SIGTERM)
            except ProcessLookupError:
                continue
            for _ in range(100):  # up to 10 s, then SIGKILL
                try:
                    os.kill(pid, 0)
                except ProcessLookupError:
                    break
                time.sleep(0.1)
            else:
                os.kill(pid, signal.SIGKILL)

    def logs(self):
        out = ""
        for name in ("slurmctld.log", "slurmd.log"):
            try:
                with open(os.path.join(self.dir, name)) as f:
                    out += f"--- {name}\n" + f.read()[-3000:]
            except OSError:
                pass
        return out

    def sbatch(self, *args):
        r = subprocess.run(["sbatch", "--parsable", *args], env=self.env, capture_output=True, text=True, timeout=60)
        if r.returncode != 0:
            raise RuntimeError("sbatch failed: " + r.stderr)
        return r.stdout.strip().split(";")[0]

    def wait(self, job, timeout=900):
        """Waits until no task of `job` is pending or running; returns every task's state."""
        deadline = time.time() + timeout
        while time.time() < deadline:
            r = subprocess.run(["squeue", "-h", "-j", job, "-o", "%T"], env=self.env, capture_output=True, text=True)
            if r.returncode == 0 and not r.stdout.strip():
                break
            time.sleep(0.3)
        else:
            raise RuntimeError(f"job {job} did not finish in {timeout} s\n" + self.logs())
        r = subprocess.run(["scontrol", "-o", "show", "job", job], env=self.env, capture_output=True, text=True)
        return re.findall(r"JobState=(\S+)", r.stdout)


class SlurmArrays(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.tmp = tempfile.mkdtemp(prefix="tamis-slurm-")
        os.chmod(cls.tmp, 0o755)
        cls.slurm = Slurm(os.path.join(cls.tmp, "slurm"))
        try:
            cls.slurm.start()
        except Exception:
            cls.slurm.stop()
            raise

    @classmethod
    def tearDownClass(cls):
        cls.slurm.stop()
        shutil.rmtree(cls.tmp, ignore_errors=True)

    def through_slurm(self, root, run_name):
        work = os.path.join(self.tmp, run_name)
        os.makedirs(os.path.join(work, "logs"))
        parts, joins = os.path.join(work, "parts"), os.path.join(work, "joins")
        log = os.path.join(work, "logs", "%x-%a.out")
        t0 = time.time()
        # sbatch --wrap runs under /bin/sh: the task's part is named from its array index.
        scan = self.slurm.sbatch("--array=0-3", "-J", "scan", "-o", log, "--wrap",
                                 f"{TAMIS} scan {root} --out {parts}/$SLURM_ARRAY_TASK_ID.part --no-cache --quiet --threads 1")
        join = self.slurm.sbatch("--array=0-1", "-J", "join", "-o", log, f"--dependency=afterok:{scan}", "--wrap",
                                 f"{TAMIS} join {parts}/*.part --out {joins}/$SLURM_ARRAY_TASK_ID.join --quiet --threads 1")
        # The merge exits 1 when findings break the policy: that is its verdict, not a failure of the job.
        merge = self.slurm.sbatch("-J", "merge", "-o", log, f"--dependency=afterok:{join}", "--wrap",
                                  f"{TAMIS} merge {parts}/*.part {joins}/*.join --out {work}/merged --quiet; "
                                  f"s=$?; echo $s > {work}/merged.status; test $s -le 1")
        plain = self.slurm.sbatch("-J", "merge-plain", "-o", log, f"--dependency=afterok:{scan}", "--wrap",
                                  f"{TAMIS} merge {parts}/*.part --out {work}/plain --quiet; test $? -le 1")
        states = {job: self.slurm.wait(job) for job in (scan, join, merge, plain)}
        elapsed = time.time() - t0
        logs = ""
        for f in sorted(os.listdir(os.path.join(work, "logs"))):
            with open(os.path.join(work, "logs", f)) as fh:
                logs += f"--- {f}\n{fh.read()}"
        self.assertEqual(len(states[scan]), 4, states)
        self.assertEqual(len(states[join]), 2, states)
        for job, s in states.items():
            self.assertTrue(all(x == "COMPLETED" for x in s), f"{states}\n{logs}\n{self.slurm.logs()}")
        self.assertEqual(sorted(os.listdir(parts)), [f"{k}.part" for k in range(4)])
        a = subprocess.run([TAMIS, "audit", root, "--out", os.path.join(work, "audit"), "--no-cache", "--quiet"])
        with open(os.path.join(work, "merged.status")) as f:
            self.assertEqual(int(f.read()), a.returncode)
        for out in ("merged", "plain"):
            for name in OUTPUTS:
                with open(os.path.join(work, "audit", name), "rb") as x, open(os.path.join(work, out, name), "rb") as y:
                    self.assertTrue(x.read() == y.read(), f"{out}/{name} differs from the audit's")
        print(f"{run_name}: scan x4 -> join x2 -> merge through Slurm in {elapsed:.1f} s", file=sys.stderr)

    def test_planted_tree(self):
        root = os.path.join(self.tmp, "planted")
        planted_copy_tree(root)
        self.through_slurm(root, "planted-run")

    def test_fashion_mnist(self):
        tree = os.path.join(os.environ["TAMIS_TEST_DATA"], "cache", "fashion-mnist-png")
        self.assertTrue(os.path.isdir(tree), "the fashion_mnist_export fixture makes it")
        self.through_slurm(tree, "fashion-mnist-run")


if __name__ == "__main__":
    TAMIS = os.path.abspath(sys.argv.pop(1))
    unittest.main(verbosity=1)
