"""Shared pieces of the sweep tests: a small case, a two-process local cluster, reading the table."""

from __future__ import annotations

import csv
import os
import time

import pytest
from box_case import make_case

#: Two keys of the box case, 2 x 3 values.
VARY = ["boundary.xmax.h=[5, 50]", "material.right.conductivity=[20.0, 100.0, 200.0]"]


def long_case(tmp_path, step=0.1):
    """The box case with many small steps (about a second per run here) and few field writes."""

    def change(d):
        d["time"]["step"] = step
        d["output"]["every"] = 10_000

    return make_case(tmp_path, change)


def read_table(path):
    with open(path, newline="") as f:
        return list(csv.DictReader(f))


def local_cluster():
    """A LocalCluster of 2 worker processes on 127.0.0.1 as the sweep starts it, and a client on it."""
    distributed = pytest.importorskip("distributed")
    from heatsoak.core.app.sweep.engine import _local_cluster

    cluster = _local_cluster(distributed, 2)
    client = distributed.Client(cluster)
    client.wait_for_workers(2, timeout=60)
    return cluster, client


def worker_pids(client) -> dict:
    return client.run(os.getpid)


def wait_for_processing(client, timeout=30.0):
    """(worker address, task key) of the first task seen running."""
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        for addr, keys in client.processing().items():
            if keys:
                return addr, keys[0]
        time.sleep(0.02)
    raise AssertionError("no task started running")
