"""The client of frustumd's JobService.

    from frustum_client import Client
    fc = Client("127.0.0.1:7447")
    m = fc.magnetization("testdata/dimer.json", temperatures=[2, 5], fields="0:15:61")
    m.magnetization          # 2D array, temperatures x fields, mu_B per cluster

Each task method creates a job (with a fresh request_id, so that a create
retried after a lost connection does not make a second job), follows it with
WatchJob, showing progress on one refreshed line of standard error or
through a callback, reopens the watch stream when the server goes away and
comes back (as the Go client does), fetches the result and returns it as
numpy arrays. Interrupting a task method (Ctrl-C, or the notebook's stop
button) cancels its job on the server. submit() returns at once with a Job
handle for wait() later.
"""

from __future__ import annotations

import ipaddress
import os
import random
import sys
import time
import uuid
from dataclasses import dataclass
from typing import Any, Callable, List, Optional, Union

import grpc

from frustum_client import errors, inputs, results
from frustum_client.errors import (
    DeadlineExceeded,
    FrustumError,
    InvalidArgument,
    Unavailable,
)
from frustum_client.frustum.v1 import frustum_pb2, jobs_pb2, jobs_pb2_grpc

__all__ = ["Client", "Job", "Progress", "DEFAULT_ADDRESS", "is_loopback", "read_token_file"]

# DEFAULT_ADDRESS is where frustumd listens unless told otherwise.
DEFAULT_ADDRESS = "127.0.0.1:7447"

_TERMINAL = {jobs_pb2.Job.SUCCEEDED, jobs_pb2.Job.FAILED, jobs_pb2.Job.CANCELLED}

_RESULT_TYPE = {
    "spectrum": "frustum.v1.SpectrumResult",
    "thermo": "frustum.v1.ThermoResult",
    "magnetization": "frustum.v1.MagnetizationResult",
    "fit": "frustum.v1.FitResult",
}

_RESULT_CLASSES = {
    "frustum.v1.SpectrumResult": frustum_pb2.SpectrumResult,
    "frustum.v1.ThermoResult": frustum_pb2.ThermoResult,
    "frustum.v1.MagnetizationResult": frustum_pb2.MagnetizationResult,
    "frustum.v1.FitResult": frustum_pb2.FitResult,
}


def is_loopback(address: str) -> bool:
    """Whether the host of HOST:PORT (or a bare host) is localhost or a
    loopback IP address."""
    host = address
    if host.startswith("["):
        host = host[1:].split("]", 1)[0]
    elif host.count(":") == 1:
        host = host.rsplit(":", 1)[0]
    if host.lower() == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def read_token_file(path: str) -> str:
    """The first line of the file, white space removed; an empty first line
    is an error."""
    try:
        with open(path, encoding="utf-8") as f:
            line = f.readline().strip()
    except OSError as e:
        raise InvalidArgument(f"token file: {e}", reason="CLIENT_INPUT") from None
    if not line:
        raise InvalidArgument(f"token file {path}: the first line is empty; it must hold the token",
                              reason="CLIENT_INPUT")
    return line


def _state_name(state: int) -> str:
    return jobs_pb2.Job.State.Name(state)


@dataclass(frozen=True)
class Progress:
    """One report of a job: its state ("QUEUED", "RUNNING", "SUCCEEDED", ...),
    the engine's stage, done of total units, the fraction of the whole job
    done (0 to 1) and the estimated seconds left (None while unknown)."""

    job: str
    state: str
    stage: str
    done: int
    total: int
    fraction: float
    seconds_left: Optional[float]

    @classmethod
    def of(cls, job) -> "Progress":
        p = job.progress
        return cls(job.name, _state_name(job.state), p.stage, int(p.done), int(p.total), float(p.fraction),
                   p.seconds_left if p.HasField("seconds_left") else None)

    def line(self) -> str:
        """The one-line form: 'jobs/ID RUNNING stage 3/10 45% eta 2s'."""
        parts = [self.job, self.state]
        if self.stage:
            parts.append(self.stage)
        if self.total:
            parts.append(f"{self.done}/{self.total}")
        parts.append(f"{100 * self.fraction:.0f}%")
        if self.seconds_left is not None and self.state == "RUNNING":
            parts.append(f"eta {self.seconds_left:.0f}s")
        return " ".join(parts)


class _LinePrinter:
    """Prints progress on one line of a stream, rewritten with a carriage
    return (a terminal and a notebook's output both honour it), at most
    every interval seconds unless the state changes, and ends the line when
    the job ends."""

    def __init__(self, stream=None, interval: float = 0.5):
        self.stream = stream or sys.stderr
        self.interval = interval
        self.last = ""
        self.last_state = None
        self.last_time = 0.0

    def __call__(self, p: Progress) -> None:
        terminal = p.state in ("SUCCEEDED", "FAILED", "CANCELLED")
        now = time.monotonic()
        if not terminal and p.state == self.last_state and now - self.last_time < self.interval:
            return
        text = p.line()
        if text != self.last:
            pad = " " * max(0, len(self.last) - len(text))
            self.stream.write("\r" + text + pad)
            self.last = text
        self.last_state, self.last_time = p.state, now
        if terminal:
            self.stream.write("\n")
            self.last, self.last_state = "", None
        self.stream.flush()


class Job:
    """A job on the server: name ("jobs/ID"), id, task, state (a name such
    as "RUNNING"), progress, from_cache, plan (the engine's plan as a dict),
    error (a FrustumError for a job that ended FAILED or CANCELLED, else
    None) and message (the Job message as last seen)."""

    def __init__(self, client: "Client", message):
        self._client = client
        self._update(message)

    def _update(self, message) -> None:
        self.message = message
        self.name = message.name
        self.id = message.name.split("/", 1)[-1]
        self.task = message.task
        self.state = _state_name(message.state)
        self.progress = Progress.of(message)
        self.from_cache = bool(message.from_cache)
        self.plan = results.engine_dict(message.plan) if message.HasField("plan") else {}
        self.error = errors.from_job(message) if message.state in (jobs_pb2.Job.FAILED, jobs_pb2.Job.CANCELLED) else None

    @property
    def done(self) -> bool:
        """Whether the job has ended (SUCCEEDED, FAILED or CANCELLED)."""
        return self.message.state in _TERMINAL

    def refresh(self) -> "Job":
        """Get the job again from the server."""
        self._update(self._client._call("GetJob", jobs_pb2.GetJobRequest(name=self.name), job=self.name))
        return self

    def cancel(self) -> "Job":
        """Cancel the job (FailedPrecondition when it has ended already)."""
        self._update(self._client.cancel(self).message)
        return self

    def wait(self, progress=None, timeout: Optional[float] = None):
        """Wait for the job to end and return its result (see Client.wait)."""
        return self._client.wait(self, progress=progress, timeout=timeout)

    def result(self):
        """The result of a job that has succeeded."""
        return self._client.result(self)

    def delete(self) -> None:
        """Delete the job and its result (it must have ended)."""
        self._client.delete(self)

    def __repr__(self) -> str:
        return f"<Job {self.name} {self.task} {self.state}>"


JobRef = Union[Job, str, Any]


def _job_name(job: JobRef) -> str:
    if isinstance(job, Job):
        return job.name
    if isinstance(job, jobs_pb2.Job):
        return job.name
    name = str(job).strip()
    if name and not name.startswith("jobs/"):
        name = "jobs/" + name
    return name


class Client:
    """A connection to one frustumd.

    address is HOST:PORT; None takes $FRUSTUM_SERVER, else 127.0.0.1:7447.
    token_file holds the user's token on its first line (None takes
    $FRUSTUM_TOKEN_FILE when set); token gives it directly. tls_ca is the PEM
    file of the CA that signed the server's certificate and turns TLS on. A
    token is never sent in plain text to an address that is not loopback.

    progress is the default progress display of the task methods: True for
    one refreshed line on standard error, False for none, or a callable that
    receives a Progress. reconnect_timeout (seconds) is how long a wait keeps
    reopening a broken watch stream; 0 turns that off. call_timeout bounds
    each unary call (None: no bound).
    """

    def __init__(
        self,
        address: Optional[str] = None,
        token_file: Optional[str] = None,
        tls_ca: Optional[str] = None,
        *,
        token: Optional[str] = None,
        progress: Union[bool, Callable[[Progress], None]] = True,
        reconnect_timeout: float = 60.0,
        call_timeout: Optional[float] = None,
    ):
        address = (address or os.environ.get("FRUSTUM_SERVER") or DEFAULT_ADDRESS).strip()
        if token_file is None and token is None:
            token_file = os.environ.get("FRUSTUM_TOKEN_FILE") or None
        if token_file is not None:
            token = read_token_file(token_file)
        if token and tls_ca is None and not is_loopback(address):
            raise InvalidArgument(
                f"refusing to send a token in plain text to {address}: give tls_ca (TLS), or use a loopback address",
                reason="CLIENT_INPUT")
        options = [
            # Reconnect quickly after a server restart (gRPC's default back-off
            # grows to two minutes).
            ("grpc.initial_reconnect_backoff_ms", 100),
            ("grpc.min_reconnect_backoff_ms", 100),
            ("grpc.max_reconnect_backoff_ms", 3000),
        ]
        if tls_ca is not None:
            try:
                with open(tls_ca, "rb") as f:
                    ca = f.read()
            except OSError as e:
                raise InvalidArgument(f"CA file: {e}", reason="CLIENT_INPUT") from None
            if b"-----BEGIN CERTIFICATE-----" not in ca:
                raise InvalidArgument(f"CA file {tls_ca} holds no PEM certificate", reason="CLIENT_INPUT")
            self._channel = grpc.secure_channel(address, grpc.ssl_channel_credentials(root_certificates=ca), options)
        else:
            self._channel = grpc.insecure_channel(address, options)
        self.address = address
        self.stub = jobs_pb2_grpc.JobServiceStub(self._channel)
        self._metadata = (("authorization", "Bearer " + token),) if token else ()
        self.progress = progress
        self.reconnect_timeout = float(reconnect_timeout)
        self.call_timeout = call_timeout
        # backoff is the first pause before reopening a watch; it doubles
        # up to max_backoff.
        self._backoff, self._max_backoff = 0.1, 2.0

    # -- connection -------------------------------------------------------

    def close(self) -> None:
        """Close the connection."""
        self._channel.close()

    def __enter__(self) -> "Client":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"<frustum_client.Client {self.address}>"

    def _call(self, method: str, request, job: Optional[str] = None, timeout: Optional[float] = None):
        try:
            return getattr(self.stub, method)(request, metadata=self._metadata,
                                              timeout=timeout if timeout is not None else self.call_timeout)
        except grpc.RpcError as e:
            raise errors.from_rpc_error(e, job=job) from None

    # -- the tasks ----------------------------------------------------------

    def spectrum(self, cluster, field=None, levels: int = 0, *, progress=None, request_id=None):
        """The spectrum of the cluster in a field B (3 numbers, T; zero when
        None): all levels, or the lowest `levels`. Returns a SpectrumResult."""
        return self._run(self._spectrum_spec(cluster, field, levels), progress, request_id)

    def thermo(self, cluster, temperatures, field=None, *, progress=None, request_id=None):
        """Energy, specific heat, entropy, magnetization and susceptibility
        at each temperature (K) in a field (3 numbers, T). Returns a
        ThermoResult."""
        return self._run(self._thermo_spec(cluster, temperatures, field), progress, request_id)

    def magnetization(self, cluster, temperatures, fields, direction=None, powder: int = 0,
                      susceptibility: bool = False, *, progress=None, request_id=None):
        """M(B) at each temperature (K) for the field magnitudes (T) along
        direction (z when None), or averaged over `powder` directions; with
        susceptibility=True also dM/dB. Returns a MagnetizationResult."""
        spec = self._magnetization_spec(cluster, temperatures, fields, direction, powder, susceptibility)
        return self._run(spec, progress, request_id)

    def fit(self, data, models, observable: str, vary, link: str = "global", powder: int = 0,
            direction=None, scaling_g: Optional[float] = None, max_evaluations: int = 0, *,
            progress=None, request_id=None):
        """Fit the models (cluster dicts, files or messages, each named) to the
        measured data (a DataFrame or dict with columns T_K, B_T, y[, sigma],
        or a CSV path) through y = a O + c, where O is the observable
        ("polarization[:GROUP]", "polarization-squared[:GROUP]",
        "fluctuation", "moment[:GROUP]"); vary lists the fitted parameters
        (dicts {name, paths, min, max, start} or 'NAME=PATH[,PATH...]:MIN:MAX').
        Returns a FitResult."""
        spec = self._fit_spec(data, models, observable, vary, link, powder, direction, scaling_g, max_evaluations)
        return self._run(spec, progress, request_id)

    # -- specs --------------------------------------------------------------

    @staticmethod
    def _spectrum_spec(cluster, field=None, levels=0):
        if isinstance(levels, bool) or int(levels) != levels or levels < 0:
            raise inputs._invalid("levels", f"want a whole number >= 0, got {levels!r}")
        return jobs_pb2.JobSpec(cluster=inputs.to_cluster(cluster), spectrum=frustum_pb2.SpectrumParameters(
            field=inputs.to_vector(field, "field"), levels=int(levels)))

    @staticmethod
    def _thermo_spec(cluster, temperatures, field=None):
        return jobs_pb2.JobSpec(cluster=inputs.to_cluster(cluster), thermo=frustum_pb2.ThermoParameters(
            temperatures=inputs.to_numbers(temperatures, "temperatures"), field=inputs.to_vector(field, "field")))

    @staticmethod
    def _magnetization_spec(cluster, temperatures, fields, direction=None, powder=0, susceptibility=False):
        if isinstance(powder, bool) or int(powder) != powder or powder < 0:
            raise inputs._invalid("powder", f"want a whole number >= 0, got {powder!r}")
        return jobs_pb2.JobSpec(cluster=inputs.to_cluster(cluster), magnetization=frustum_pb2.MagnetizationParameters(
            temperatures=inputs.to_numbers(temperatures, "temperatures"),
            fields=inputs.to_numbers(fields, "fields"),
            direction=inputs.to_vector(direction, "direction"),
            powder=int(powder), susceptibility=bool(susceptibility)))

    @staticmethod
    def _fit_spec(data, models, observable, vary, link="global", powder=0, direction=None, scaling_g=None,
                  max_evaluations=0):
        if isinstance(models, (dict, str, os.PathLike, frustum_pb2.Cluster)):
            models = [models]
        if isinstance(vary, (dict, str, frustum_pb2.FitParameter)):
            vary = [vary]
        params = frustum_pb2.FitParameters(
            data=inputs.to_measured_data(data),
            models=[inputs.to_cluster(m, f"models[{i}]") for i, m in enumerate(models)],
            observable=str(observable),
            vary=[inputs.to_fit_parameter(v, f"vary[{i}]") for i, v in enumerate(vary or [])],
            link=link or "",
            powder=int(powder),
            direction=inputs.to_vector(direction, "direction"),
            max_evaluations=int(max_evaluations),
        )
        if scaling_g is not None:
            params.scaling_g = inputs.to_numbers([scaling_g], "scaling_g")[0]
        return jobs_pb2.JobSpec(fit=params)

    def spec(self, task: str, *args, **kwargs):
        """The JobSpec message of a task ("spectrum", "thermo",
        "magnetization" or "fit") with the arguments of its method."""
        builders = {"spectrum": self._spectrum_spec, "thermo": self._thermo_spec,
                    "magnetization": self._magnetization_spec, "fit": self._fit_spec}
        if task not in builders:
            raise InvalidArgument(f"task: {task!r} is not one of {sorted(builders)}", reason="CLIENT_INPUT")
        return builders[task](*args, **kwargs)

    # -- jobs ---------------------------------------------------------------

    def submit(self, task, *args, request_id: Optional[str] = None, **kwargs) -> Job:
        """Create a job and return at once: submit("magnetization", cluster,
        temperatures, fields, ...) with the arguments of the task method, or
        submit(spec) with a JobSpec message. request_id (default: a fresh
        uuid4) makes a repeated submit return the first job."""
        spec = task if isinstance(task, jobs_pb2.JobSpec) else self.spec(task, *args, **kwargs)
        return Job(self, self._create(spec, request_id or str(uuid.uuid4())))

    def _create(self, spec, request_id: str):
        """CreateJob, retried with the same request_id while the server is
        unavailable for a moment (a retry returns the first job, never a
        second one)."""
        request = jobs_pb2.CreateJobRequest(spec=spec, request_id=request_id)
        pause = self._backoff
        for attempt in range(4):
            try:
                return self._call("CreateJob", request)
            except Unavailable:
                if attempt == 3:
                    raise
                time.sleep(pause)
                pause = min(2 * pause, self._max_backoff)

    def get(self, job: JobRef) -> Job:
        """The job as the server has it now."""
        name = _job_name(job)
        return Job(self, self._call("GetJob", jobs_pb2.GetJobRequest(name=name), job=name))

    def jobs(self, state: Optional[str] = None, limit: Optional[int] = None) -> List[Job]:
        """The caller's jobs, newest first (only those in state, such as
        "RUNNING", when given), following the pages; at most limit."""
        try:
            st = jobs_pb2.Job.State.Value(state.upper()) if state else jobs_pb2.Job.STATE_UNSPECIFIED
        except ValueError:
            raise InvalidArgument(f"state: {state!r} is not one of QUEUED, RUNNING, SUCCEEDED, FAILED, CANCELLED",
                                  reason="CLIENT_INPUT") from None
        out: List[Job] = []
        token = ""
        while True:
            size = 1000 if limit is None else max(1, min(1000, limit - len(out)))
            resp = self._call("ListJobs", jobs_pb2.ListJobsRequest(page_size=size, page_token=token, state=st))
            out.extend(Job(self, j) for j in resp.jobs)
            token = resp.next_page_token
            if not token or (limit is not None and len(out) >= limit):
                return out[:limit] if limit is not None else out

    def cancel(self, job: JobRef) -> Job:
        """Move a queued or running job to CANCELLED."""
        name = _job_name(job)
        return Job(self, self._call("CancelJob", jobs_pb2.CancelJobRequest(name=name), job=name))

    def delete(self, job: JobRef) -> None:
        """Delete a job that has ended, and its result."""
        name = _job_name(job)
        self._call("DeleteJob", jobs_pb2.DeleteJobRequest(name=name), job=name)

    def watch(self, job: JobRef, callback: Optional[Callable[[Progress], None]] = None,
              timeout: Optional[float] = None):
        """Follow the job until it ends, calling callback with a Progress at
        once and at every change; return the final Job message.

        When the stream breaks after it was established, it is opened again
        with a growing back-off for up to reconnect_timeout seconds (the
        server restarting, say); then Unavailable. timeout bounds the whole
        watch (DeadlineExceeded; the job goes on)."""
        name = _job_name(job)
        deadline = None if timeout is None else time.monotonic() + timeout
        established = False
        pause = self._backoff
        down_since = None
        while True:
            remaining = None if deadline is None else deadline - time.monotonic()
            if remaining is not None and remaining <= 0:
                raise DeadlineExceeded(f"{name} did not end within {timeout:g} s", job=name)
            final, got, err = self._watch_once(name, callback, remaining)
            if final is not None:
                return final
            if got:
                established = True
                pause = self._backoff
                down_since = None
            if err.code == "DEADLINE_EXCEEDED" and deadline is not None:
                raise DeadlineExceeded(f"{name} did not end within {timeout:g} s", job=name)
            if not established or err.code not in ("UNAVAILABLE", "ABORTED", "CANCELLED") \
                    or self.reconnect_timeout <= 0:
                raise err
            now = time.monotonic()
            if down_since is None:
                down_since = now
            if now - down_since >= self.reconnect_timeout:
                raise Unavailable(f"watching {name}: no server for {self.reconnect_timeout:g} s: {err.message}",
                                  job=name)
            # Full jitter in [pause/2, pause), so that many watchers do not
            # come back at the same instant.
            time.sleep(pause / 2 + random.random() * pause / 2)
            pause = min(2 * pause, self._max_backoff)

    def _watch_once(self, name, callback, timeout):
        """Read one watch stream: (terminal job, True, None) or (None,
        whether anything arrived, the error that ended it)."""
        got = False
        stream = self.stub.WatchJob(jobs_pb2.WatchJobRequest(name=name), metadata=self._metadata, timeout=timeout)
        try:
            for job in stream:
                got = True
                if callback is not None:
                    callback(Progress.of(job))
                if job.state in _TERMINAL:
                    return job, True, None
        except grpc.RpcError as e:
            return None, got, errors.from_rpc_error(e, job=name)
        finally:
            stream.cancel()
        return None, got, Unavailable("the watch stream ended before the job did", job=name)

    def wait(self, job: JobRef, progress=None, timeout: Optional[float] = None, cancel_on_interrupt: bool = False):
        """Wait for the job to end and return its result as the task method
        would (SpectrumResult, ThermoResult, MagnetizationResult or
        FitResult). A job that ended FAILED raises JobFailed with its code
        and field violations, one that was cancelled Cancelled. progress as
        for the client (None: the client's default). timeout (seconds)
        raises DeadlineExceeded and leaves the job running. With
        cancel_on_interrupt, a KeyboardInterrupt cancels the job first."""
        name = _job_name(job)
        message = job.message if isinstance(job, Job) else (job if isinstance(job, jobs_pb2.Job) else None)
        callback = self._progress_callback(progress)
        try:
            if message is None or message.state not in _TERMINAL:
                message = self.watch(name, callback, timeout)
            elif callback is not None:
                callback(Progress.of(message))
        except KeyboardInterrupt:
            if cancel_on_interrupt:
                self._abandon(name)
            raise
        if isinstance(job, Job):
            job._update(message)
        return self._finished(message)

    def _abandon(self, name: str) -> None:
        try:
            self._call("CancelJob", jobs_pb2.CancelJobRequest(name=name), job=name, timeout=5)
            print(f"\n{name} cancelled on the server", file=sys.stderr)
        except FrustumError as e:
            print(f"\n{name}: could not cancel it: {e}", file=sys.stderr)

    def _progress_callback(self, progress):
        if progress is None:
            progress = self.progress
        if progress is True:
            return _LinePrinter()
        if progress is False or progress is None:
            return None
        if not callable(progress):
            raise InvalidArgument("progress: want True, False or a callable taking a Progress", reason="CLIENT_INPUT")
        return progress

    def _run(self, spec, progress, request_id):
        job = self.submit(spec, request_id=request_id)
        return self.wait(job, progress=progress, cancel_on_interrupt=True)

    def _finished(self, message):
        if message.state in (jobs_pb2.Job.FAILED, jobs_pb2.Job.CANCELLED):
            raise errors.from_job(message)
        if message.state != jobs_pb2.Job.SUCCEEDED:
            raise FrustumError(f"{message.name} is {_state_name(message.state)}, not finished", code="INTERNAL",
                               job=message.name)
        result = self._inline_result(message)
        if result is None:
            result = self._fetch_result(message.name)
        want = _RESULT_TYPE.get(message.task)
        if want and result.DESCRIPTOR.full_name != want:
            raise FrustumError(f"{message.name}: the server returned a {result.DESCRIPTOR.full_name} for a {want}",
                               code="INTERNAL", job=message.name)
        return results.wrap(result, job=message.name)

    @staticmethod
    def _inline_result(message):
        which = message.WhichOneof("result")
        return getattr(message, which) if which else None

    def result(self, job: JobRef):
        """The result of a job that has succeeded, as its task method
        returns it."""
        name = _job_name(job)
        message = job.message if isinstance(job, Job) else self._call("GetJob", jobs_pb2.GetJobRequest(name=name),
                                                                      job=name)
        if message.state not in _TERMINAL:
            message = self._call("GetJob", jobs_pb2.GetJobRequest(name=name), job=name)
        return self._finished(message)

    def _fetch_result(self, name: str):
        """The result message of a succeeded job, from the GetJobResult
        chunks: in order, without gaps or overlaps, one type and one total
        size, adding up to it; otherwise DATA_LOSS."""

        def loss(msg):
            return FrustumError(f"result of {name}: {msg}", code="DATA_LOSS", job=name)

        typ, total, buf = None, 0, bytearray()
        stream = self.stub.GetJobResult(jobs_pb2.GetJobResultRequest(name=name), metadata=self._metadata)
        try:
            for chunk in stream:
                if typ is None:
                    typ, total = chunk.type, chunk.total_size
                    if not typ:
                        raise loss("the first chunk names no type")
                    if total < 0:
                        raise loss(f"negative total size {total}")
                elif chunk.type != typ or chunk.total_size != total:
                    raise loss(f"chunk at offset {chunk.offset} is of type {chunk.type!r} and size "
                               f"{chunk.total_size}, the first of {typ!r} and {total}")
                if chunk.offset != len(buf):
                    raise loss(f"chunk at offset {chunk.offset}, expected offset {len(buf)}")
                if len(buf) + len(chunk.data) > total:
                    raise loss(f"chunk at offset {chunk.offset} runs past the total size {total}")
                buf += chunk.data
        except grpc.RpcError as e:
            raise errors.from_rpc_error(e, job=name) from None
        if typ is None:
            raise loss("the stream holds no chunk")
        if len(buf) != total:
            raise loss(f"the stream ended after {len(buf)} of {total} bytes")
        cls = _RESULT_CLASSES.get(typ)
        if cls is None:
            raise FrustumError(f"result of {name}: this client does not know the result type {typ!r}",
                               code="UNIMPLEMENTED", job=name)
        msg = cls()
        try:
            msg.ParseFromString(bytes(buf))
        except Exception as e:
            raise loss(str(e)) from None
        return msg
