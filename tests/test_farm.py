"""The render farm: shots as Dask tasks on local workers or a shared cluster, with faults."""

import contextlib
import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from framestyle import farm, store

from conftest import ROOT, STYLE

ENV = {**os.environ, "PYTHONPATH": str(ROOT)}
FAST = ["--width", "128", "--iterations", "4", "--tolerance", "0", "-q"]


@pytest.fixture(scope="module")
def four_shots(small_clip, tmp_path_factory) -> tuple[Path, Path]:
    """The small clip cut into four 5-frame shots by a shot list (source numbers 1..20)."""
    listing = tmp_path_factory.mktemp("farm") / "shots.txt"
    listing.write_text("1\n6\n11\n16\n")
    return small_clip, listing


def _stylise(clip, listing, out, *extra, **popen):
    cmd = [sys.executable, "-m", "framestyle", "stylise", str(clip), "--style", str(STYLE), "--out", str(out),
           "--shot-list", str(listing), *FAST, *extra]
    return subprocess.Popen(cmd, env=ENV, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, **popen)


@pytest.fixture(scope="module")
def one_process(four_shots, tmp_path_factory) -> Path:
    """The reference: one process, one torch thread (what each of two workers on 2 cores gets)."""
    out = tmp_path_factory.mktemp("one") / "out"
    proc = _stylise(*four_shots, out, "--threads", "1")
    assert proc.wait(timeout=600) == 0, proc.stderr.read()
    return out


def _pngs(folder: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(folder.glob("take_*.png"))}


def test_two_workers_give_the_frames_of_a_one_process_render(four_shots, one_process, tmp_path):
    proc = _stylise(*four_shots, tmp_path / "farm", "--workers", "2")
    assert proc.wait(timeout=600) == 0, proc.stderr.read()
    assert "20 stylised frames" in proc.stdout.read()
    assert len(_pngs(one_process)) == 20
    assert _pngs(tmp_path / "farm") == _pngs(one_process)  # bit-identical: same threads per shot
    log = (tmp_path / "farm" / store.LOG).read_text()
    assert {line.split(" pid ")[1].split()[0] for line in log.splitlines() if "rendered on" in line}.__len__() == 2
    records = store.Store(tmp_path / "farm").records()  # each shot keeps the setup its worker computed with
    assert [r["environment"]["torch threads"] for r in records.values()] == [1, 1, 1, 1]


def test_a_worker_killed_mid_shot_is_replaced_and_the_shot_resumes(four_shots, one_process, tmp_path):
    out = tmp_path / "farm"
    proc = _stylise(*four_shots, out, "--workers", "2", "--iterations", "12")
    victim, deadline = None, time.time() + 300
    while victim is None and time.time() < deadline and proc.poll() is None:
        for shot, record in store.Store(out).records().items():
            if 2 <= len(record["frames"]) < 5:  # a shot part done: kill the process rendering it
                holder = json.loads((out / ".framestyle" / "locks" / f"shot_{shot:03d}.lock").read_text())
                victim = holder["pid"]
                break
        time.sleep(0.05)
    assert victim is not None, "no shot was caught half done"
    os.kill(victim, signal.SIGKILL)
    assert proc.wait(timeout=600) == 0, proc.stderr.read()
    assert "Traceback" not in proc.stderr.read()
    reference = subprocess.run([sys.executable, "-m", "framestyle", "stylise", str(four_shots[0]), "--style",
                                str(STYLE), "--out", str(tmp_path / "one"), "--shot-list", str(four_shots[1]), *FAST,
                                "--iterations", "12", "--threads", "1"], env=ENV, capture_output=True, text=True)
    assert reference.returncode == 0, reference.stderr
    assert _pngs(out) == _pngs(tmp_path / "one")
    log = (out / store.LOG).read_text()
    for name in _pngs(out):  # no frame solved twice: the shot resumed from its record
        assert log.count(f"frame {name} ") == 1


def test_an_unreachable_scheduler_is_one_line_within_seconds(four_shots, tmp_path):
    started = time.time()
    proc = _stylise(*four_shots, tmp_path / "out", "--scheduler", "tcp://127.0.0.1:9")
    assert proc.wait(timeout=120) == 2
    err = proc.stderr.read().strip().splitlines()
    assert len(err) == 1 and "cannot reach the Dask scheduler" in err[0] and "tcp://127.0.0.1:9" in err[0]
    assert time.time() - started < 40  # interpreter and torch start-up, then a 5 s connect timeout


def test_a_user_error_in_one_shot_stops_the_render_with_one_line(small_clip, tmp_path):
    # Shot 4's own look names a style image that disappears once the render has started.
    ink = tmp_path / "ink.png"
    ink.write_bytes(STYLE.read_bytes())
    look = tmp_path / "look.toml"
    look.write_text('[shots.4]\nstyles = ["ink.png"]\n')
    listing = tmp_path / "shots.txt"
    listing.write_text("1\n6\n11\n16\n")
    out = tmp_path / "out"
    proc = _stylise(small_clip, listing, out, "--workers", "2", "--look", str(look))
    deadline = time.time() + 300
    while not (out / store.MANIFEST).exists() and time.time() < deadline:
        time.sleep(0.05)
    ink.unlink()
    assert proc.wait(timeout=600) == 2
    said = proc.stderr.read().strip().splitlines()
    err = [line for line in said if not line.startswith("framestyle: warning:")]  # [shots.4]'s own style is said
    assert len(err) == 1 and "ink.png" in err[0], said
    assert any("[shots.4] sets styles for shot 4" in line for line in said)
    for name in store.Store(out).finished():  # what finished is intact
        assert (out / name).stat().st_size > 0


@contextlib.contextmanager
def _cluster(tmp_path: Path, workers: int = 2):
    """As the README says: `dask scheduler`, then workers with one thread and one "shot"
    resource, each in a working folder of its own (tmp_path / "worker"), as on another
    machine. Yields (address, the scheduler's process)."""
    dask = str(Path(sys.executable).parent / "dask")
    address_file = tmp_path / "scheduler.json"
    scheduler = subprocess.Popen([dask, "scheduler", "--port", "0", "--no-dashboard", "--scheduler-file",
                                  str(address_file)], env=ENV, stderr=subprocess.DEVNULL)
    started = []
    try:
        deadline = time.time() + 60
        while not address_file.exists() and time.time() < deadline:
            time.sleep(0.1)
        address = json.loads(address_file.read_text())["address"]
        elsewhere = tmp_path / "worker"
        elsewhere.mkdir(exist_ok=True)
        started = [subprocess.Popen([dask, "worker", address, "--nthreads", "1", "--resources", "shot=1",
                                     "--no-dashboard"], env=ENV, stderr=subprocess.DEVNULL, cwd=elsewhere)
                   for _ in range(workers)]
        yield address, scheduler
    finally:
        for p in [*started, scheduler]:
            p.terminate()
            p.wait(timeout=60)


def test_a_shared_cluster_started_with_dasks_own_commands(four_shots, one_process, tmp_path):
    # --out as typed in the client's folder: a worker in a folder of its own once wrote the whole
    # render there, and the client found none (a wrangler's sweep)
    with _cluster(tmp_path) as (address, _):
        proc = _stylise(*four_shots, Path("farm"), "--scheduler", address, "--threads", "1", cwd=tmp_path)
        assert proc.wait(timeout=600) == 0, proc.stderr.read()
        assert _pngs(tmp_path / "farm") == _pngs(one_process)
        assert not (tmp_path / "worker" / "farm").exists()


def test_shot_workers_share_their_machines_cores():
    # each worker's torch takes its machine's cores over the shot workers there: two dask workers on
    # a 2-core machine with 2 threads each took 59 s for 258 frames, with 1 each 30 s (a farm sweep)
    class Client:  # the part of distributed.Client's scheduler_info() read
        def scheduler_info(self):
            return {"workers": {
                "tcp://10.0.0.1:1": {"host": "10.0.0.1", "resources": {"shot": 1}},
                "tcp://10.0.0.1:2": {"host": "10.0.0.1", "resources": {"shot": 1}},
                "tcp://10.0.0.1:3": {"host": "10.0.0.1", "resources": {}},  # no shot resource: no share
                "tcp://10.0.0.2:1": {"host": "10.0.0.2", "resources": {"shot": 1}},
            }}

    assert farm._workers_per_machine(Client()) == {"tcp://10.0.0.1:1": 2, "tcp://10.0.0.1:2": 2, "tcp://10.0.0.2:1": 1}


def test_two_renders_sent_to_one_cluster_at_once_each_get_all_their_frames(four_shots, one_process, tmp_path):
    # Their tasks were both named shot-1 ... shot-4, so the second render was handed the first's
    # results and exited 0 with none or some of its frames (a wrangler's farm sweep)
    with _cluster(tmp_path) as (address, _):
        renders = [_stylise(*four_shots, tmp_path / name, "--scheduler", address, "--threads", "1")
                   for name in ("a", "b")]
        for proc in renders:
            assert proc.wait(timeout=900) == 0, proc.stderr.read()
    assert _pngs(tmp_path / "a") == _pngs(tmp_path / "b") == _pngs(one_process)


def test_a_lost_scheduler_is_one_line(four_shots, tmp_path):
    with _cluster(tmp_path) as (address, scheduler):
        proc = _stylise(*four_shots, tmp_path / "farm", "--scheduler", address, "--threads", "1",
                        "--iterations", "30")
        deadline = time.time() + 300
        while not list((tmp_path / "farm").glob("take_*.png")) and time.time() < deadline:
            time.sleep(0.2)
        scheduler.kill()  # a traceback ending in FutureCancelledError, exit 1, before
        assert proc.wait(timeout=300) == 2
        err = proc.stderr.read().strip().splitlines()
        assert len(err) == 1 and f"--scheduler {address}: lost the Dask scheduler" in err[0], err


def test_resume_with_workers_continues_a_render_started_in_one_process(four_shots, one_process, tmp_path):
    out = tmp_path / "out"
    proc = _stylise(*four_shots, out, "--threads", "1", "--shots", "1")
    assert proc.wait(timeout=600) == 0, proc.stderr.read()
    resumed = subprocess.run([sys.executable, "-m", "framestyle", "resume", str(out), "--workers", "2", "-q"],
                             env=ENV, capture_output=True, text=True, timeout=600)
    assert resumed.returncode == 0, resumed.stderr
    assert _pngs(out) == _pngs(one_process)
    one_shot = subprocess.run([sys.executable, "-m", "framestyle", "resume", str(out), "--workers", "2", "--shots", "4"],
                              env=ENV, capture_output=True, text=True, timeout=600)
    assert one_shot.returncode == 0 and "--workers 2 for 1 shot(s)" in one_shot.stderr, one_shot.stderr


class _Future:
    """The part of a distributed Future that farm._run_shots reads; ``outcome`` is what the shot's
    task ends with (a value, an exception to raise) or None while it is queued or running."""

    def __init__(self, key, outcome):
        self.key, self._outcome, self.status = key, outcome, "pending"

    def done(self):
        return self._outcome is not None

    def result(self):
        if isinstance(self._outcome, BaseException):
            raise self._outcome
        return self._outcome

    def cancel(self):
        self.status = "cancelled"

    def cancelled(self):
        return self.status == "cancelled"


class _Cluster:
    """A scheduler's answers without a scheduler: its shot workers and each shot's outcome."""

    def __init__(self, workers, outcomes):
        self.workers, self.outcomes, self.submitted, self.polls = workers, outcomes, {}, 0

    def submit(self, fn, plan, shot, *args, key, **options):
        self.submitted[shot] = _Future(key, self.outcomes.get(shot))
        return self.submitted[shot]

    def scheduler_info(self):
        self.polls += 1
        assert self.polls < 1000, "the render is still waiting"  # fail, never hang
        return {"workers": self.workers}

    def processing(self):
        return {}


def _plan(tmp_path, shots):
    from types import SimpleNamespace

    from framestyle.shots.shot import Shot

    cut = [Shot(n, 5 * (n - 1), 5 * n - 1) for n in range(1, shots + 1)]
    return SimpleNamespace(wanted=tuple(range(1, shots + 1)), shots=tuple(cut), out=tmp_path,
                           names=[f"take_{i:03d}.png" for i in range(5 * shots)])


def test_a_cluster_left_without_a_shot_worker_is_one_line_after_a_grace_period(tmp_path, monkeypatch):
    # a killed worker's nanny restarts it within seconds; a cluster with no shot worker for longer
    # waited forever before (a farm sweep); now it is one line that says how to go on
    monkeypatch.setattr(farm, "_POLL_SECONDS", 0.01)
    monkeypatch.setattr(farm, "_NO_WORKER_SECONDS", 0.2)
    cluster = _Cluster({"tcp://10.0.0.1:1": {"host": "10.0.0.1", "resources": {}}}, {})
    started = time.monotonic()
    with pytest.raises(farm.FramestyleError, match="no worker offering the 'shot' resource has been there for 0 s"):
        farm._run_shots(cluster, _plan(tmp_path, 2), None, lambda *a, **k: None, "--scheduler tcp://x:8786")
    assert 0.2 <= time.monotonic() - started < 5


def test_every_shot_whose_workers_died_is_named_and_queued_shots_are_not_started(tmp_path, monkeypatch):
    from distributed import KilledWorker

    monkeypatch.setattr(farm, "_POLL_SECONDS", 0.01)
    worker = {"tcp://10.0.0.1:1": {"host": "10.0.0.1", "resources": {"shot": 1}}}
    died = KilledWorker("shot-1", "tcp://10.0.0.1:1", 3)
    cluster = _Cluster(worker, {1: died, 2: died})  # shot 3 still queued
    seen = []
    with store.Store(tmp_path).shot(3, wait=False) as held:  # another process renders shot 3 meanwhile
        assert held is not None
        with pytest.raises(farm.FramestyleError, match=r"^shot\(s\) 1, 2: the workers rendering or holding them died"):
            farm._run_shots(cluster, _plan(tmp_path, 3), None, lambda kind, **k: seen.append((kind, k)), "2 workers")
    assert cluster.submitted[3].cancelled()  # its task, queued, is not started after the deaths
    assert seen == [("farm", {"done": 0, "shots": [3]})]  # progress names the shots whose locks are held


@pytest.mark.parametrize("cores, shots, started", [(4, 2, 2), (2, 8, 2), (64, 3, 3)])
def test_local_workers_are_no_more_than_the_cores_and_the_shots(tmp_path, monkeypatch, cores, shots, started):
    # a farm sweep asked for --workers 1000 on 2 cores: 1000 torch processes started and the
    # 4-frame render had not finished after 120 s; a worker without a core or a shot only slows
    # the others (two torch processes on 2 cores: several times slower, benchmarks/README)
    import distributed

    class Started(Exception):
        pass

    def cluster(n_workers, **_):
        raise Started(n_workers)

    warnings = []
    monkeypatch.setattr(distributed, "LocalCluster", cluster)
    monkeypatch.setattr(farm.os, "cpu_count", lambda: cores)
    monkeypatch.setattr(farm, "_set_threads", lambda threads: None)  # the test process keeps its threads
    monkeypatch.setattr(farm, "plan_render", lambda *a, **k: _plan(tmp_path, shots))
    with pytest.raises(Started) as raised:
        farm.farm_render(tmp_path, tmp_path, None, workers=1000,
                         progress=lambda event, **info: warnings.append(info.get("message")))
    assert raised.value.args == (started,)
    assert f"--workers 1000 on {cores} cores" in warnings[0]


def test_a_workers_warnings_are_said_where_the_render_is_watched(tmp_path, monkeypatch):
    # a worker's progress goes nowhere: what it had to say (a shot continued under another setup,
    # a recorded frame gone) was only in the log; the shot's summary brings it to the client
    from framestyle.pipeline import ShotSummary
    from framestyle.shots.shot import Shot

    monkeypatch.setattr(farm, "_POLL_SECONDS", 0.01)
    worker = {"tcp://10.0.0.1:1": {"host": "10.0.0.1", "resources": {"shot": 1}}}
    said = "shot 1 continues at take_003.png under torch threads 4 (was 1): ..."
    cluster = _Cluster(worker, {1: ShotSummary(Shot(1, 0, 4), "1-5", warnings=(said,))})
    seen = []
    with pytest.raises(farm.FramestyleError, match="came back from 1 worker unfinished"):  # no frames in the fake
        farm._run_shots(cluster, _plan(tmp_path, 1), None, lambda kind, **k: seen.append((kind, k)), "1 worker")
    assert ("warning", {"message": said}) in seen
