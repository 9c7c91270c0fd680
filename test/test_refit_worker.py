# Copyright 2026 The helpaware_node authors
#
# Licensed under the Apache License, Version 2.0 (the "License");
# you may not use this file except in compliance with the License.
# You may obtain a copy of the License at
#
#     http://www.apache.org/licenses/LICENSE-2.0
#
# Unless required by applicable law or agreed to in writing, software
# distributed under the License is distributed on an "AS IS" BASIS,
# WITHOUT WARRANTIES OR CONDITIONS OF ANY KIND, either express or implied.
# See the License for the specific language governing permissions and
# limitations under the License.

"""The site-learning refit worker process (fit/refit_worker.py): its BLAS thread settings.

The worker is spawned with one BLAS thread (OpenBLAS, OpenMP, MKL) unless the user set a
count, and the node's own environment is left as it was.
"""
import os

from helpaware_node.fit.refit_worker import (
    BLAS_THREAD_VARS,
    BlasProbe,
    RefitWorker,
    worker_environment,
)
import pytest


def empty_reader():
    return [], []


def probe(worker):
    worker.submit(empty_reader, BlasProbe())
    for _ in range(600):                # up to a minute: spawning imports the package
        reply = worker._conn.poll(0.1) and worker.poll()
        if reply:
            return reply
    raise AssertionError("the refit worker did not answer")


def test_worker_environment_sets_one_thread_only_where_unset():
    assert worker_environment({}) == dict.fromkeys(BLAS_THREAD_VARS, "1")
    assert worker_environment({"OMP_NUM_THREADS": "4", "MKL_NUM_THREADS": ""}) == {
        "OPENBLAS_NUM_THREADS": "1", "MKL_NUM_THREADS": "1"}


@pytest.mark.parametrize("user_omp", [None, "3", ""])
def test_the_spawned_worker_runs_with_one_blas_thread_unless_the_user_set_it(monkeypatch,
                                                                             user_omp):
    for name in BLAS_THREAD_VARS:
        monkeypatch.delenv(name, raising=False)
    if user_omp is not None:
        monkeypatch.setenv("OMP_NUM_THREADS", user_omp)
    before = dict(os.environ)
    worker = RefitWorker()
    try:
        status, seen = probe(worker)
    finally:
        worker.stop()
    assert status == "ok"
    assert seen == {"OPENBLAS_NUM_THREADS": "1", "MKL_NUM_THREADS": "1",
                    "OMP_NUM_THREADS": user_omp or "1"}   # empty counts as unset
    assert dict(os.environ) == before           # the node's environment is as it was (an
    #                                             empty value too)
