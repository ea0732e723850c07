"""Tests of the client against a real frustumd (see support.py).

Physics checks use the spin-1/2 Heisenberg dimer H = J S1.S2 - (mu_B/k_B) g B
(S1^z + S2^z), whose levels are textbook (PHYSICS.md: singlet at -3J/4,
triplet at J/4, split by the field into J/4 - g mu_B B m / k_B, m = -1, 0,
1), so that

    Z = e^{3J/4T} + e^{-J/4T} (1 + 2 cosh y),   y = g mu_B B / k_B T
    M = 2 g e^{-J/4T} sinh y / Z                 (mu_B per dimer)

and at B = 0 the susceptibility is Bleaney and Bowers' (Proc. R. Soc. A 214,
451 (1952)): dM/dB = (2 g^2 mu_B^2 / k_B T) / (3 + e^{J/T}). The specific
heat at B = 0 is that of a singlet and a triplet J above it (textbook):
C = (J/T)^2 3 e^{-J/T} / (1 + 3 e^{-J/T})^2.

The fit test sets the dimer, started at the wrong J, against points made
from the closed form above: y = a M/M_sat + c with J = 10 K, a = 10, c = 0.5
and M_sat = 2 mu_B, so the fit must return those values.
"""

import copy
import hashlib
import json
import math
import os
import shutil
import subprocess
import tempfile
import threading
import time
import unittest

import numpy as np

import support

from frustum_client import (
    MU_B_OVER_K_B,
    AlreadyExists,
    Cancelled,
    Client,
    FailedPrecondition,
    InvalidArgument,
    NotFound,
    PermissionDenied,
    ResourceExhausted,
    Unauthenticated,
)

J, G = 10.0, 2.0  # testdata/dimer.json

with open(os.path.join(support.TESTDATA, "dimer.json")) as f:
    DIMER = json.load(f)


def dimer_magnetization(t, b, j=J, g=G):
    y = g * MU_B_OVER_K_B * b / t
    u, s = math.exp(-j / (4 * t)), math.exp(3 * j / (4 * t))
    return 2 * g * u * math.sinh(y) / (s + u * (1 + 2 * math.cosh(y)))


def dimer_susceptibility(t, b, j=J, g=G):
    """dM/dB of dimer_magnetization, differentiated by hand."""
    y = g * MU_B_OVER_K_B * b / t
    u, s = math.exp(-j / (4 * t)), math.exp(3 * j / (4 * t))
    z = s + u * (1 + 2 * math.cosh(y))
    dm_dy = 2 * g * u * (math.cosh(y) * z - 2 * u * math.sinh(y) ** 2) / z ** 2
    return dm_dy * g * MU_B_OVER_K_B / t


def bleaney_bowers(t, j=J, g=G):
    return 2 * g * g * MU_B_OVER_K_B / (t * (3 + math.exp(j / t)))


def long_cluster():
    """A ring of 12 spins 1/2 with alternating g: each field point is its own
    diagonalization, so 2000 fields keep a worker busy for minutes, yet the
    engine stops at the next block when the job is cancelled."""
    n = 12
    return {"name": "slow ring (alternating g)",
            "sites": [{"label": f"s{i}", "g": 2.0 + 0.1 * (i % 2)} for i in range(n)],
            "bonds": [{"a": f"s{i}", "b": f"s{(i + 1) % n}", "exchange": 10.0} for i in range(n)]}


server = None


def setUpModule():
    global server
    server = support.Frustumd().start()


def tearDownModule():
    if server is not None:
        server.close()
    support.cleanup_build()


class Tasks(unittest.TestCase):
    def setUp(self):
        self.fc = Client(server.address, progress=False)

    def tearDown(self):
        self.fc.close()

    def test_dimer_magnetization_closed_form(self):
        cluster = copy.deepcopy(DIMER)
        cluster["sites"][0]["group"] = "left"
        cluster["sites"][1]["group"] = "right"
        temps, fields = [1.0, 2.0, 5.0, 10.0], np.linspace(0, 15, 16)
        m = self.fc.magnetization(cluster, temps, fields, susceptibility=True)
        self.assertEqual(m.magnetization.shape, (4, 16))
        np.testing.assert_array_equal(m.temperature, temps)
        np.testing.assert_array_equal(m.field, fields)
        np.testing.assert_array_equal(m.direction, [0, 0, 1])
        want = np.array([[dimer_magnetization(t, b) for b in fields] for t in temps])
        np.testing.assert_allclose(m.magnetization, want, rtol=1e-9, atol=1e-12)
        for side in ("left", "right"):
            np.testing.assert_allclose(m.groups[side], want / 2, rtol=1e-9, atol=1e-12)
        chi = np.array([[dimer_susceptibility(t, b) for b in fields] for t in temps])
        np.testing.assert_allclose(m.susceptibility, chi, rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(m.susceptibility[:, 0], [bleaney_bowers(t) for t in temps], rtol=1e-9)
        self.assertAlmostEqual(m.saturation, 2.0, places=12)
        self.assertEqual(m.group_saturation, {"left": 1.0, "right": 1.0})
        self.assertEqual(m.engine["method"], "full diagonalization")
        self.assertLessEqual(m.engine["neglected_weight"], 1e-15)
        self.assertGreater(m.engine["eigenvectors"], 0)  # the group moments need them
        self.assertGreaterEqual(m.engine["eigenvectors_skipped"], 0)
        df = m.to_dataframe()
        self.assertEqual(list(df.columns), ["T_K", "B_T", "M_muB", "chi_muB_per_T", "M_left_muB", "M_right_muB"])
        self.assertEqual(len(df), 64)
        row = df[(df.T_K == 2.0) & (df.B_T == 5.0)].iloc[0]
        self.assertAlmostEqual(row.M_muB, dimer_magnetization(2.0, 5.0), places=10)

    def test_dimer_spectrum(self):
        s = self.fc.spectrum(DIMER)
        np.testing.assert_allclose(s.energies, [-3 * J / 4] + [J / 4] * 3, atol=1e-12)
        self.assertEqual(s.degeneracy.tolist(), [1, 3])
        np.testing.assert_allclose(s.total_spin, [0, 1])
        self.assertEqual(s.total_states, 4)
        self.assertFalse(s.truncated)
        z = G * MU_B_OVER_K_B * 10.0
        s10 = self.fc.spectrum(DIMER, field=[0, 0, 10.0], levels=2)
        np.testing.assert_allclose(s10.energies, [J / 4 - z, -3 * J / 4], atol=1e-12)
        self.assertTrue(s10.truncated)

    def test_dimer_thermo(self):
        temps = [0.5, 1.0, 2.0, 5.0, 20.0]
        th = self.fc.thermo(DIMER, temps)
        np.testing.assert_allclose(th.susceptibility, [bleaney_bowers(t) for t in temps], rtol=1e-9)
        c = [(J / t) ** 2 * 3 * math.exp(-J / t) / (1 + 3 * math.exp(-J / t)) ** 2 for t in temps]
        np.testing.assert_allclose(th.specific_heat, c, rtol=1e-9, atol=1e-14)
        np.testing.assert_array_equal(th.magnetization, np.zeros(5))
        self.assertEqual(list(th.to_dataframe().columns), ["T_K", "E_K", "C_kB", "S_kB", "M_muB", "chi_muB_per_T"])

    def test_powder_of_an_isotropic_dimer(self):
        # Heisenberg exchange with one isotropic g: M does not depend on the
        # field direction, so the powder average is the curve along z.
        fields = [0.0, 2.0, 6.0]
        p = self.fc.magnetization(DIMER, [2.0], fields, powder=20)
        np.testing.assert_allclose(p.magnetization[0], [dimer_magnetization(2.0, b) for b in fields], rtol=1e-9,
                                   atol=1e-12)
        self.assertIsNotNone(p.powder)
        self.assertGreaterEqual(p.powder["directions"], 20)
        with self.assertRaises(InvalidArgument) as cm:
            self.fc.magnetization(DIMER, [2.0], fields, powder=20, direction=[1, 0, 0])
        self.assertEqual(cm.exception.field, "spec.magnetization.direction")

    def test_fit_recovers_the_dimer(self):
        temps = np.repeat([2.0, 4.0], 10)
        fields = np.tile(np.linspace(1.0, 10.0, 10), 2)
        y = np.array([10 * dimer_magnetization(t, b) / 2 + 0.5 for t, b in zip(temps, fields)])
        start = copy.deepcopy(DIMER)
        start["name"] = "dimer"
        start["bonds"][0]["exchange"] = 6.0
        data = {"T_K": temps, "B_T": fields, "y": y, "sigma": np.full(len(y), 0.01)}
        fit = self.fc.fit(data, [start], "polarization", ["J=bonds[0].exchange:1:40"])
        self.assertEqual(fit.observable, "polarization")
        self.assertEqual(fit.models.keys(), ["dimer", "free spin 1/2", "free spin 1"])
        self.assertIs(fit.best, fit.models["dimer"])
        best = fit.best
        self.assertTrue(best.converged)
        j = best.parameters["J"]
        self.assertEqual((j.unit, j.paths, j.at_bound), ("K", ["bonds[0].exchange"], False))
        self.assertAlmostEqual(j.value, 10.0, delta=1e-6)
        self.assertAlmostEqual(best.links[0].scale, 10.0, delta=1e-6)
        self.assertAlmostEqual(best.links[0].offset, 0.5, delta=1e-6)
        np.testing.assert_allclose(best.curve, y, atol=1e-8)
        self.assertAlmostEqual(best.cluster["bonds"][0]["exchange"], 10.0, delta=1e-6)
        np.testing.assert_array_equal(fit.temperature, temps)
        table = fit.table()
        self.assertEqual(table["delta_aic"][0], 0.0)
        self.assertEqual(len(fit.to_dataframe()), 3 * len(y))

    def test_progress_callback(self):
        seen = []
        cluster = copy.deepcopy(DIMER)
        cluster["name"] = "dimer for the progress test"
        self.fc.thermo(cluster, [3.0, 4.0], progress=seen.append)
        self.assertGreaterEqual(len(seen), 1)
        self.assertEqual(seen[-1].state, "SUCCEEDED")
        self.assertEqual(seen[-1].fraction, 1.0)
        self.assertTrue(all(p.job == seen[0].job for p in seen))

    def test_submit_wait_and_result_chunks(self):
        job = self.fc.submit("magnetization", DIMER, [1.5], "0:10:11")
        self.assertTrue(job.name.startswith("jobs/"))
        self.assertEqual(job.task, "magnetization")
        r = self.fc.wait(job, progress=False)
        self.assertEqual(job.state, "SUCCEEDED")
        # The same result through GetJobResult's chunks, and by job name.
        chunked = self.fc._fetch_result(job.name)
        self.assertEqual(chunked, r.message)
        self.assertEqual(self.fc.result(job.id).message, r.message)
        self.assertIn(job.name, [j.name for j in self.fc.jobs(limit=50)])

    def test_request_id_is_idempotent_and_cache(self):
        spec_args = ("thermo", DIMER, [7.0])
        a = self.fc.submit(*spec_args, request_id="python-client-test-1")
        b = self.fc.submit(*spec_args, request_id="python-client-test-1")
        self.assertEqual(a.name, b.name)
        first = a.wait(progress=False)
        c = self.fc.submit(*spec_args)  # a fresh request_id: a new job, answered from the cache
        self.assertNotEqual(c.name, a.name)
        self.assertTrue(c.from_cache)
        self.assertEqual(c.wait(progress=False).message, first.message)
        # The same request_id with another spec is refused, naming the field.
        with self.assertRaises(AlreadyExists) as cm:
            self.fc.submit("thermo", DIMER, [8.0], request_id="python-client-test-1")
        self.assertEqual(cm.exception.reason, "REQUEST_ID_REUSED")
        self.assertEqual([f.field for f in cm.exception.fields], ["request_id"])

    def test_delete(self):
        job = self.fc.submit("spectrum", DIMER, levels=1)
        job.wait(progress=False)
        job.delete()
        with self.assertRaises(NotFound):
            self.fc.get(job)


class Errors(unittest.TestCase):
    def setUp(self):
        self.fc = Client(server.address, progress=False)

    def tearDown(self):
        self.fc.close()

    def test_unknown_bond_label(self):
        cluster = copy.deepcopy(DIMER)
        cluster["bonds"][0]["b"] = "c"
        with self.assertRaises(InvalidArgument) as cm:
            self.fc.magnetization(cluster, [2.0], [1.0])
        e = cm.exception
        self.assertEqual(e.code, "INVALID_ARGUMENT")
        self.assertEqual(e.reason, "INVALID_SPEC")
        self.assertEqual(e.field, "spec.cluster.bonds[0].b")
        self.assertIn('"c"', e.fields[0].description)

    def test_negative_temperature(self):
        with self.assertRaises(InvalidArgument) as cm:
            self.fc.thermo(DIMER, [2.0, -1.0])
        self.assertEqual(cm.exception.field, "spec.thermo.temperatures[1]")

    def test_bad_fit_path(self):
        data = {"T_K": [2.0, 2.0, 4.0, 4.0], "B_T": [1.0, 2.0, 1.0, 2.0], "y": [0.1, 0.2, 0.05, 0.1]}
        with self.assertRaises(InvalidArgument) as cm:
            self.fc.fit(data, [DIMER], "polarization", ["J=bonds[0].exchang:1:40"])
        self.assertEqual(cm.exception.field, "spec.fit.vary[0].paths[0]")
        with self.assertRaises(InvalidArgument) as cm:
            self.fc.fit(data, [DIMER], "polarisation", ["J=bonds[0].exchange:1:40"])
        self.assertEqual(cm.exception.field, "spec.fit.observable")

    def test_client_side_input(self):
        with self.assertRaises(InvalidArgument) as cm:
            self.fc.spectrum({"name": "x", "sites": [{"label": "a", "spinn": 1}]})
        self.assertEqual(cm.exception.field, "cluster")
        with self.assertRaises(InvalidArgument) as cm:
            self.fc.magnetization(DIMER, [2.0], "0:15")
        self.assertEqual(cm.exception.field, "fields")

    def test_too_many_sites(self):
        big = {"name": "41 spins", "sites": [{"label": f"s{i}"} for i in range(41)],
               "bonds": [{"a": "s0", "b": "s1", "exchange": 1.0}]}
        with self.assertRaises(ResourceExhausted) as cm:
            self.fc.spectrum(big)
        e = cm.exception
        self.assertEqual(e.reason, "CLUSTER_TOO_LARGE")
        self.assertEqual(e.field, "spec.cluster.sites")
        self.assertEqual(e.metadata["sites"], "41")

    def test_over_memory(self):
        # 34 spins with DM vectors along x: no conserved S^z, one block of
        # 2^34 complex states; even the Lanczos route's vectors (2^34 x 16
        # bytes each) are far beyond any memory limit.
        n = 34
        big = {"name": "20-spin DM chain", "sites": [{"label": f"s{i}"} for i in range(n)],
               "bonds": [{"a": f"s{i}", "b": f"s{i + 1}", "exchange": 1.0, "dm": [0.1, 0, 0]} for i in range(n - 1)]}
        with self.assertRaises(ResourceExhausted) as cm:
            self.fc.spectrum(big)
        e = cm.exception
        self.assertEqual(e.reason, "MEMORY_LIMIT")
        self.assertEqual(e.metadata["dimension"], str(2 ** n))
        self.assertGreater(int(e.metadata["need_bytes"]), int(e.metadata["limit_bytes"]))
        self.assertTrue(e.quota)

    def test_not_found(self):
        with self.assertRaises(NotFound) as cm:
            self.fc.get("jobs/" + "0" * 24)
        self.assertEqual(cm.exception.reason, "JOB_NOT_FOUND")
        with self.assertRaises(InvalidArgument) as cm:
            self.fc.get("not-a-job")
        self.assertEqual(cm.exception.field, "name")

    def test_cancel(self):
        job = self.fc.submit("magnetization", long_cluster(), [1.0], "0.01:20:2000")
        running = threading.Event()

        def on_progress(p):
            if p.state == "RUNNING" and not running.is_set():
                running.set()
                self.fc.cancel(job)

        with self.assertRaises(Cancelled) as cm:
            self.fc.wait(job, progress=on_progress, timeout=300)
        self.assertTrue(running.is_set())
        self.assertEqual(cm.exception.job, job.name)
        self.assertEqual(job.state, "CANCELLED")
        self.assertIsInstance(job.error, Cancelled)
        with self.assertRaises(FailedPrecondition):
            job.cancel()
        # The server is free again: a small job runs to the end.
        self.assertEqual(len(self.fc.spectrum(DIMER, levels=1).energies), 1)


class Interrupt(unittest.TestCase):
    def test_interrupt_cancels_the_job(self):
        # A KeyboardInterrupt (Ctrl-C, a notebook's stop button) while a task
        # method waits cancels its job on the server; here the progress
        # callback raises it once the job runs.
        fc = Client(server.address, progress=False)
        seen = []

        def interrupt(p):
            seen.append(p)
            if p.state == "RUNNING":
                raise KeyboardInterrupt

        with self.assertRaises(KeyboardInterrupt):
            fc.magnetization(long_cluster(), [1.5], "0.01:20:2000", progress=interrupt)
        self.assertEqual(fc.get(seen[-1].job).state, "CANCELLED")
        fc.close()


class Tokens(unittest.TestCase):
    """A server with a token file (allowed on loopback too): the client sends
    the token of its token file as "authorization: Bearer TOKEN"; each user
    reaches only their own jobs."""

    def test_tokens_and_owners(self):
        d = tempfile.mkdtemp(prefix="frustum-tokens-")
        tokens = {"usera": "token-of-usera-for-the-test", "userb": "token-of-userb-for-the-test"}
        files = {}
        with open(os.path.join(d, "tokens"), "w") as f:
            for user, token in tokens.items():
                f.write(f"{user} {hashlib.sha256(token.encode()).hexdigest()}\n")
                files[user] = os.path.join(d, user + ".token")
                with open(files[user], "w") as tf:
                    tf.write(token + "\n")
        own = support.Frustumd("--tokens", os.path.join(d, "tokens")).start()
        try:
            a = Client(own.address, token_file=files["usera"], progress=False)
            b = Client(own.address, token_file=files["userb"], progress=False)
            job = a.submit("spectrum", DIMER)
            self.assertEqual(job.message.owner, "usera")
            self.assertEqual(len(a.wait(job).energies), 4)
            with self.assertRaises(PermissionDenied):
                b.get(job)
            self.assertEqual(b.jobs(), [])
            with self.assertRaises(Unauthenticated) as cm:
                Client(own.address, token="not-a-known-token", progress=False).jobs()
            self.assertEqual(cm.exception.reason, "UNKNOWN_TOKEN")
            with self.assertRaises(Unauthenticated):
                Client(own.address, progress=False).jobs()
            a.close()
            b.close()
        finally:
            own.close()
            shutil.rmtree(d, ignore_errors=True)

    def test_tls(self):
        # A self-signed certificate for 127.0.0.1, made with Debian's openssl,
        # is the CA file of the client.
        openssl = shutil.which("openssl")
        if openssl is None:
            support._unavailable("no openssl to make a test certificate")
        d = tempfile.mkdtemp(prefix="frustum-tls-")
        cert, key = os.path.join(d, "cert.pem"), os.path.join(d, "key.pem")
        subprocess.run([openssl, "req", "-x509", "-newkey", "ec", "-pkeyopt", "ec_paramgen_curve:prime256v1", "-nodes",
                        "-keyout", key, "-out", cert, "-subj", "/CN=frustum-test",
                        "-addext", "subjectAltName=IP:127.0.0.1", "-days", "1"], check=True, capture_output=True)
        token = os.path.join(d, "token")
        with open(token, "w") as f:
            f.write("token-of-usera-over-tls\n")
        with open(os.path.join(d, "tokens"), "w") as f:
            f.write("usera " + hashlib.sha256(b"token-of-usera-over-tls").hexdigest() + "\n")
        own = support.Frustumd("--tls-cert", cert, "--tls-key", key, "--tokens", os.path.join(d, "tokens")).start()
        try:
            fc = Client(own.address, token_file=token, tls_ca=cert, progress=False)
            np.testing.assert_allclose(fc.spectrum(DIMER).energies, [-7.5, 2.5, 2.5, 2.5], atol=1e-12)
            self.assertEqual(fc.jobs()[0].message.owner, "usera")
            fc.close()
            with self.assertRaises(InvalidArgument):
                Client(own.address, tls_ca=token)  # not a PEM certificate
        finally:
            own.close()
            shutil.rmtree(d, ignore_errors=True)

    def test_no_plain_text_token_off_loopback(self):
        # Refused before any connection is made.
        with self.assertRaises(InvalidArgument):
            Client("frustum.example.invalid:7447", token="t")
        from frustum_client.client import is_loopback
        for addr, want in [("127.0.0.1:7447", True), ("127.8.9.1:1", True), ("[::1]:7447", True), ("::1", True),
                           ("localhost:7447", True), ("frustum.example.invalid:7447", False), ("[::2]:1", False)]:
            self.assertEqual(is_loopback(addr), want, addr)


class Reconnect(unittest.TestCase):
    """The watch stream breaks when the server dies and is opened again when
    it is back, as the Go client's Watch does. With one worker, a long job
    holds the slot so that the watched job is still queued when the server
    is killed (SIGKILL) and restarted on the same port and data directory;
    cancelling the long job then lets the watched one run."""

    def test_watch_survives_restart(self):
        own = support.Frustumd("--workers", "1").start()
        try:
            fc = Client(own.address, progress=False, reconnect_timeout=120)
            blocker = fc.submit("magnetization", long_cluster(), [1.0], "0.01:20:2000")
            watched = fc.submit("magnetization", DIMER, [2.0], [0.0, 5.0, 10.0])
            seen, cond = [], threading.Condition()
            out = {}

            def on_progress(p):
                with cond:
                    seen.append(p.state)
                    cond.notify_all()

            def waiter():
                try:
                    out["result"] = fc.wait(watched, progress=on_progress, timeout=300)
                except Exception as e:  # reported by the main thread
                    out["error"] = e

            t = threading.Thread(target=waiter)
            t.start()
            with cond:
                self.assertTrue(cond.wait_for(lambda: "QUEUED" in seen, timeout=60))
            own.kill()
            own.start()
            with cond:  # the stream is open again: the job is shown at once
                self.assertTrue(cond.wait_for(lambda: seen.count("QUEUED") >= 2, timeout=120), seen)
            end = time.monotonic() + 60
            while True:
                try:
                    fc.cancel(blocker)
                    break
                except FailedPrecondition:
                    break
                except Exception:
                    if time.monotonic() > end:
                        raise
                    time.sleep(0.1)
            t.join(300)
            self.assertFalse(t.is_alive())
            self.assertNotIn("error", out, out.get("error"))
            np.testing.assert_allclose(out["result"].magnetization[0],
                                       [dimer_magnetization(2.0, b) for b in (0.0, 5.0, 10.0)], rtol=1e-9,
                                       atol=1e-12)
            self.assertEqual(seen[-1], "SUCCEEDED")
            fc.close()
        finally:
            own.close()


if __name__ == "__main__":
    unittest.main()
