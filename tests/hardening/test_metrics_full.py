"""A full metrics folder degrades the metrics, never the service."""

from __future__ import annotations

import errno
import os
import shutil
import subprocess
import tempfile

import pytest

from service.api import metrics as m
from tests.hardening.server import Gunicorn, request

pytestmark = pytest.mark.filterwarnings("ignore::ResourceWarning")


def _enospc(fd, size):
    raise OSError(errno.ENOSPC, "No space left on device")


def test_metric_file_that_cannot_get_blocks_raises_and_leaves_no_empty_file(tmp_path, monkeypatch):
    monkeypatch.setattr(m, "_allocate", _enospc)
    path = tmp_path / "counter_1.db"
    with pytest.raises(OSError):
        m.AllocatedMmapedDict(str(path))
    assert not path.exists()  # an empty file would break MultiProcessCollector for every reader


def test_metric_file_grows_with_allocated_blocks(tmp_path):
    path = tmp_path / "counter_2.db"
    d = m.AllocatedMmapedDict(str(path))
    for i in range(2000):  # past the first 64 KiB: the file doubles, allocated first
        d.write_value(f"key-{i:05d}-" + "x" * 40, float(i), 0.0)
    d.close()
    size = os.stat(path).st_size
    assert size > 65536
    assert os.stat(path).st_blocks * 512 >= size  # no hole left for a later SIGBUS
    values = {row[0]: row[1] for row in m.mmap_dict.MmapedDict.read_all_values_from_file(str(path))}
    assert values["key-01999-" + "x" * 40] == 1999.0


def test_a_failing_metric_update_stops_recording_and_is_reported():
    metrics = m.ServiceMetrics("")
    calls = []

    def failing():
        calls.append(1)
        raise OSError(errno.ENOSPC, "No space left on device")

    metrics.record(failing)
    metrics.record(failing)  # not tried again
    assert calls == [1]
    assert metrics.degraded and "No space left" in metrics.degraded
    assert b"rolloff_metrics_degraded 1" in metrics.exposition()
    assert b"rolloff_metrics_degraded 0" in m.ServiceMetrics("").exposition()


def _can_mount() -> bool:
    return os.geteuid() == 0 and shutil.which("mount") is not None


@pytest.mark.skipif(not _can_mount(), reason="mounting a small tmpfs needs root")
def test_service_keeps_answering_with_a_full_metrics_file_system():
    mnt = tempfile.mkdtemp(prefix="rolloff-fullfs-")
    if subprocess.run(["mount", "-t", "tmpfs", "-o", "size=256k", "tmpfs", mnt]).returncode != 0:
        pytest.skip("this machine does not allow mounting a tmpfs")
    server = None
    try:
        folder = os.path.join(mnt, "metrics")
        os.makedirs(folder)
        server = Gunicorn(workers=2)
        server.env["PROMETHEUS_MULTIPROC_DIR"] = folder
        server.start()
        fd = os.open(os.path.join(mnt, "fill"), os.O_WRONLY | os.O_CREAT)
        try:
            while True:
                os.write(fd, b"\0" * 4096)
        except OSError as exc:
            assert exc.errno == errno.ENOSPC
        finally:
            os.close(fd)
        pids = set(server.worker_pids())
        # many label sets: each new one grows the metric files of the process answering it
        for i in range(1, 80):
            assert request(server.port, "GET", f"/v1/values/nearest?value={i}k&series=E24", timeout=30)[0] == 200
        for path in ("/healthz", "/readyz", "/v1/catalog",
                     "/v1/approximations?response=lowpass&family=butterworth&order=3&cutoff_hz=1k"):
            assert request(server.port, "GET", path, timeout=30)[0] == 200
        status, _, body = request(server.port, "GET", "/metrics", timeout=30)
        assert status == 200
        assert b"rolloff_metrics_degraded" in body
        assert set(server.worker_pids()) == pids  # no worker died (the old behaviour was a SIGBUS loop)
    finally:
        if server is not None:
            server.stop()
        subprocess.run(["umount", mnt])
        os.rmdir(mnt)
