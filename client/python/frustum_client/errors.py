"""Typed errors of the Frustum client.

Every error of the server is a gRPC status with a code, a message and
details: a google.rpc.ErrorInfo (domain "frustum") with the reason, such as
INVALID_SPEC, MEMORY_LIMIT or CLUSTER_TOO_LARGE, and for bad input a
google.rpc.BadRequest that names each wrong field by its dotted path, such as
"spec.cluster.bonds[0].b". The details travel in the trailing metadata
"grpc-status-details-bin" as a serialized google.rpc.Status. Debian's
python3-grpcio has no grpc_status module and Debian packages no Python
google.rpc protos, so this module decodes the trailer itself with the
wire-compatible messages of frustum_client.rpc.status_pb2.

The classes:

    FrustumError                 every error; .code, .reason, .field, .message
      InvalidArgument            INVALID_ARGUMENT (also a ValueError)
      ResourceExhausted          RESOURCE_EXHAUSTED (too many sites, memory)
      NotFound                   NOT_FOUND
      PermissionDenied           PERMISSION_DENIED
      Unauthenticated            UNAUTHENTICATED
      FailedPrecondition         FAILED_PRECONDITION
      Cancelled                  CANCELLED: a call, or a job that was cancelled
      Unavailable                UNAVAILABLE: no server, or it is stopping
      DeadlineExceeded           a wait or call that ran out of time (also a TimeoutError)
      JobFailed                  a job that ended FAILED; .code is its JobError code
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Dict, List, Optional

from frustum_client.rpc import status_pb2

__all__ = [
    "FieldViolation",
    "FrustumError",
    "InvalidArgument",
    "ResourceExhausted",
    "NotFound",
    "PermissionDenied",
    "Unauthenticated",
    "FailedPrecondition",
    "Cancelled",
    "Unavailable",
    "DeadlineExceeded",
    "JobFailed",
    "from_rpc_error",
    "from_job",
    "STATUS_DETAILS_KEY",
]

# STATUS_DETAILS_KEY is the trailing metadata key of the serialized
# google.rpc.Status.
STATUS_DETAILS_KEY = "grpc-status-details-bin"

_TYPE_PREFIX = "type.googleapis.com/"


@dataclass(frozen=True)
class FieldViolation:
    """A wrong field of a request: its dotted path and why it is wrong."""

    field: str
    description: str


class FrustumError(Exception):
    """An error of the Frustum service or of this client.

    code is the canonical gRPC code name ("INVALID_ARGUMENT", ...); reason
    the ErrorInfo reason ("INVALID_SPEC", "MEMORY_LIMIT", ...) or None;
    field the path of the first field violation or None; fields every
    violation; metadata the ErrorInfo metadata (for MEMORY_LIMIT:
    need_bytes, limit_bytes, ...); quota the QuotaFailure descriptions; job
    the job's name when the error concerns one.
    """

    default_code = "UNKNOWN"

    def __init__(
        self,
        message: str,
        *,
        code: Optional[str] = None,
        reason: Optional[str] = None,
        fields: Optional[List[FieldViolation]] = None,
        metadata: Optional[Dict[str, str]] = None,
        quota: Optional[List[str]] = None,
        job: Optional[str] = None,
    ):
        super().__init__(message)
        self.message = message
        self.code = code or self.default_code
        self.reason = reason
        self.fields = list(fields or [])
        self.metadata = dict(metadata or {})
        self.quota = list(quota or [])
        self.job = job

    @property
    def field(self) -> Optional[str]:
        """The dotted path of the first wrong field, or None."""
        return self.fields[0].field if self.fields else None

    def __str__(self) -> str:
        s = f"{self.code}: {self.message}"
        if self.job and self.job not in self.message:
            s = f"{self.job}: {s}"
        if self.fields:
            paths = ", ".join(v.field for v in self.fields)
            if paths not in self.message:
                s += f" (fields: {paths})"
        return s

    def __repr__(self) -> str:
        return (f"{type(self).__name__}(code={self.code!r}, reason={self.reason!r}, "
                f"field={self.field!r}, message={self.message!r})")


class InvalidArgument(FrustumError, ValueError):
    """Bad input: a cluster, parameter or request field that is wrong."""

    default_code = "INVALID_ARGUMENT"


class ResourceExhausted(FrustumError):
    """A task beyond the server's limits: sites, states or memory."""

    default_code = "RESOURCE_EXHAUSTED"


class NotFound(FrustumError):
    """No job of that name."""

    default_code = "NOT_FOUND"


class PermissionDenied(FrustumError):
    """Another user's job."""

    default_code = "PERMISSION_DENIED"


class Unauthenticated(FrustumError):
    """No token, or one the server does not know."""

    default_code = "UNAUTHENTICATED"


class FailedPrecondition(FrustumError):
    """The job is not in a state for the call (cancel a finished job, ...)."""

    default_code = "FAILED_PRECONDITION"


class AlreadyExists(FrustumError):
    """A request_id reused with a different spec (reason REQUEST_ID_REUSED;
    metadata["job"] names the job it already belongs to)."""

    default_code = "ALREADY_EXISTS"


class Cancelled(FrustumError):
    """A call that was cancelled, or a job that ended CANCELLED."""

    default_code = "CANCELLED"


class Unavailable(FrustumError):
    """No server at the address, or it is shutting down."""

    default_code = "UNAVAILABLE"


class DeadlineExceeded(FrustumError, TimeoutError):
    """A call or a wait that ran out of time; the job itself goes on."""

    default_code = "DEADLINE_EXCEEDED"


class JobFailed(FrustumError):
    """A job that ended FAILED; code, message and fields are its JobError's."""

    default_code = "INTERNAL"


_BY_CODE = {
    "INVALID_ARGUMENT": InvalidArgument,
    "OUT_OF_RANGE": InvalidArgument,
    "RESOURCE_EXHAUSTED": ResourceExhausted,
    "NOT_FOUND": NotFound,
    "PERMISSION_DENIED": PermissionDenied,
    "UNAUTHENTICATED": Unauthenticated,
    "FAILED_PRECONDITION": FailedPrecondition,
    "ALREADY_EXISTS": AlreadyExists,
    "CANCELLED": Cancelled,
    "UNAVAILABLE": Unavailable,
    "DEADLINE_EXCEEDED": DeadlineExceeded,
}


def error_class(code: str) -> type:
    """The FrustumError subclass of a canonical code name."""
    return _BY_CODE.get(code, FrustumError)


def decode_status_details(data: bytes):
    """Decode a serialized google.rpc.Status into (message, reason,
    metadata, fields, quota)."""
    st = status_pb2.Status()
    st.ParseFromString(data)
    reason, metadata, fields, quota = None, {}, [], []
    for any_msg in st.details:
        name = any_msg.type_url[len(_TYPE_PREFIX):] if any_msg.type_url.startswith(_TYPE_PREFIX) \
            else any_msg.type_url.rsplit("/", 1)[-1]
        if name == "google.rpc.ErrorInfo":
            info = status_pb2.ErrorInfo()
            info.ParseFromString(any_msg.value)
            reason = info.reason or None
            metadata = dict(info.metadata)
        elif name == "google.rpc.BadRequest":
            br = status_pb2.BadRequest()
            br.ParseFromString(any_msg.value)
            fields.extend(FieldViolation(v.field, v.description) for v in br.field_violations)
        elif name == "google.rpc.QuotaFailure":
            qf = status_pb2.QuotaFailure()
            qf.ParseFromString(any_msg.value)
            quota.extend(v.description for v in qf.violations)
    return st.message, reason, metadata, fields, quota


def from_rpc_error(err, job: Optional[str] = None) -> FrustumError:
    """The typed error of a grpc.RpcError, with the status details that its
    trailing metadata carries."""
    code_obj = err.code() if hasattr(err, "code") else None
    code = code_obj.name if code_obj is not None else "UNKNOWN"
    message = err.details() if hasattr(err, "details") else str(err)
    message = message or ""
    reason, metadata, fields, quota = None, {}, [], []
    trailers = ()
    if hasattr(err, "trailing_metadata"):
        try:
            trailers = err.trailing_metadata() or ()
        except Exception:  # a call that never reached the server
            trailers = ()
    for key, value in trailers:
        if key == STATUS_DETAILS_KEY:
            try:
                msg, reason, metadata, fields, quota = decode_status_details(value)
            except Exception:  # undecodable details: keep code and message
                continue
            message = message or msg
    cls = error_class(code)
    return cls(message, code=code, reason=reason, fields=fields, metadata=metadata, quota=quota, job=job)


def from_job(job) -> FrustumError:
    """The error of a Job message that ended FAILED (JobFailed) or CANCELLED
    (Cancelled)."""
    from frustum_client.frustum.v1 import jobs_pb2

    e = job.error
    fields = [FieldViolation(v.field, v.description) for v in e.field_violations]
    if job.state == jobs_pb2.Job.CANCELLED:
        return Cancelled(e.message or "the job was cancelled", code="CANCELLED", fields=fields, job=job.name)
    code = e.code or "UNKNOWN"
    if code == "CANCELED":
        code = "CANCELLED"
    return JobFailed(e.message or "the job failed", code=code, fields=fields, job=job.name)
