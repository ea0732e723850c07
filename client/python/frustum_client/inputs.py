"""Turning Python values into the request messages.

Clusters come as a Cluster message, a dict in the protojson form of the
cluster file (lowerCamelCase keys such as "exchangeZ" and "gTensor"; the
proto names such as "exchange_z" are accepted too), a JSON string, or the
path of a cluster file. Number lists come as a number, a sequence, a numpy
array, or a string in the grid syntax of the command line ("1,2,5",
"0:15:61", "log:0.5:300:100"). Measured data come as a pandas DataFrame, a
dict of arrays or the path of a CSV file; fit parameters as dicts or strings
'NAME=PATH[,PATH...]:MIN:MAX'.

Errors in any of these raise InvalidArgument with the field named, before
anything is sent.
"""

from __future__ import annotations

import json
import math
import os
import re
from typing import Any, Dict, List, Mapping, Optional, Sequence

from google.protobuf import json_format

from frustum_client.errors import FieldViolation, InvalidArgument
from frustum_client.frustum.v1 import frustum_pb2

__all__ = ["to_cluster", "grid", "to_numbers", "to_vector", "to_measured_data", "to_fit_parameter"]


def _invalid(field: str, reason: str) -> InvalidArgument:
    return InvalidArgument(f"{field}: {reason}", reason="CLIENT_INPUT", fields=[FieldViolation(field, reason)])


def to_cluster(cluster: Any, field: str = "cluster") -> frustum_pb2.Cluster:
    """The Cluster message of a message, dict, JSON text or file path."""
    if isinstance(cluster, frustum_pb2.Cluster):
        return cluster
    source = None
    if isinstance(cluster, (str, os.PathLike)):
        text = os.fspath(cluster)
        if text.lstrip().startswith("{"):
            source = "JSON text"
        else:
            try:
                with open(text, encoding="utf-8") as f:
                    text = f.read()
            except OSError as e:
                raise _invalid(field, f"cannot read the cluster file: {e}") from None
            source = os.fspath(cluster)
        try:
            cluster = json.loads(text)
        except json.JSONDecodeError as e:
            raise _invalid(field, f"{source}: not JSON: {e}") from None
    if not isinstance(cluster, Mapping):
        raise _invalid(field, f"want a Cluster message, a dict in the cluster-file form or a file path, got {type(cluster).__name__}")
    msg = frustum_pb2.Cluster()
    try:
        json_format.ParseDict(dict(cluster), msg)
    except json_format.ParseError as e:
        where = f" ({source})" if source else ""
        raise _invalid(field, f"not a cluster{where}: {e}") from None
    return msg


_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")


def _number(item: str, field: str) -> float:
    t = item.strip()
    if not _NUMBER.match(t):
        raise _invalid(field, f"{t!r} is not a decimal number")
    v = float(t)
    if not math.isfinite(v):
        raise _invalid(field, f"{t!r} is not a finite number")
    return v


def grid(text: str, field: str = "grid") -> List[float]:
    """The points of a grid in the command-line syntax: "5", "1,2,5",
    "0:15:61" (61 points, both ends included) or "log:0.5:300:100"."""
    t = text.strip()
    if not t:
        raise _invalid(field, "empty grid: give a number, a list 1,2,5, a range 0:15:61 or log:0.5:300:100")
    if ":" not in t:
        return [_number(item, field) for item in t.split(",")]
    if "," in t:
        raise _invalid(field, "a grid is either a list (1,2,5) or a range (0:15:61), not both")
    parts = t.split(":")
    log_scale = parts[0].strip().lower() == "log"
    if log_scale:
        parts = parts[1:]
    if len(parts) != 3:
        raise _invalid(field, "a range is START:END:COUNT or log:START:END:COUNT")
    start, end = _number(parts[0], field), _number(parts[1], field)
    try:
        n = int(parts[2].strip())
    except ValueError:
        raise _invalid(field, f"{parts[2].strip()!r} is not a number of points") from None
    if n < 2:
        raise _invalid(field, f"a range needs at least 2 points, got {n}")
    if start == end:
        raise _invalid(field, "range start and end are equal; give a single number instead")
    if log_scale:
        if start <= 0 or end <= 0:
            raise _invalid(field, "a logarithmic range needs both ends > 0")
        a, b = math.log(start), math.log(end)
        out = [math.exp(a + i / (n - 1) * (b - a)) for i in range(n)]
        out[0] = start
    else:
        out = [start + i / (n - 1) * (end - start) for i in range(n)]
    out[-1] = end
    return out


def to_numbers(values: Any, field: str) -> List[float]:
    """A list of finite floats from a number, a sequence, a numpy array or a
    grid string."""
    if values is None:
        return []
    if isinstance(values, str):
        return grid(values, field)
    if hasattr(values, "tolist"):  # numpy arrays and scalars, pandas series
        values = values.tolist()
    if isinstance(values, (int, float)) and not isinstance(values, bool):
        values = [values]
    out = []
    try:
        items = list(values)
    except TypeError:
        raise _invalid(field, f"want numbers, got {type(values).__name__}") from None
    for i, v in enumerate(items):
        try:
            x = float(v)
        except (TypeError, ValueError):
            raise _invalid(f"{field}[{i}]", f"{v!r} is not a number") from None
        if not math.isfinite(x):
            raise _invalid(f"{field}[{i}]", f"{x} is not a finite number")
        out.append(x)
    return out


def to_vector(values: Any, field: str) -> List[float]:
    """Three numbers (a field or a direction), or [] for None; a string is
    read as "x,y,z"."""
    if values is None:
        return []
    v = to_numbers(values, field)
    if len(v) != 3:
        raise _invalid(field, f"a vector is 3 numbers x, y, z, got {len(v)}")
    return v


def to_fit_parameter(spec: Any, field: str) -> frustum_pb2.FitParameter:
    """A FitParameter from a message, a dict {name, paths, min, max, start}
    (paths a list or one string) or a string 'NAME=PATH[,PATH...][:MIN:MAX[:START]]'
    (MIN, MAX and START may be left empty: 'J=bonds[0].exchange::50')."""
    if isinstance(spec, frustum_pb2.FitParameter):
        return spec
    if isinstance(spec, str):
        name, eq, rest = spec.partition("=")
        if not eq or not name.strip() or not rest.strip():
            raise _invalid(field, f"{spec!r}: write NAME=PATH[,PATH...]:MIN:MAX")
        parts = rest.split(":")
        if len(parts) not in (1, 3, 4):
            raise _invalid(field, f"{spec!r}: write NAME=PATH[,PATH...]:MIN:MAX (or :MIN:MAX:START)")
        d: Dict[str, Any] = {"name": name.strip(), "paths": [p.strip() for p in parts[0].split(",")]}
        for key, text in zip(("min", "max", "start"), parts[1:]):
            if text.strip():
                d[key] = _number(text, f"{field}.{key}")
        spec = d
    if not isinstance(spec, Mapping):
        raise _invalid(field, f"want a dict or a string NAME=PATH:MIN:MAX, got {type(spec).__name__}")
    unknown = set(spec) - {"name", "paths", "path", "min", "max", "start"}
    if unknown:
        raise _invalid(field, f"unknown keys {sorted(unknown)} (use name, paths, min, max, start)")
    paths = spec.get("paths", spec.get("path"))
    if isinstance(paths, str):
        paths = [paths]
    if not spec.get("name") or not paths:
        raise _invalid(field, "a fit parameter needs a name and at least one path")
    msg = frustum_pb2.FitParameter(name=str(spec["name"]), paths=[str(p).strip() for p in paths])
    for key in ("min", "max", "start"):
        if spec.get(key) is not None:
            v = to_numbers([spec[key]], f"{field}.{key}")[0]
            setattr(msg, key, v)
    if any(not p for p in msg.paths):
        raise _invalid(field + ".paths", "an empty path")
    return msg


def _role(name: str, base: str):
    """Whether a header name is base, base_UNIT or base[UNIT] (the header
    rules of compare.ReadCSV): (is, unit, what is wrong with it)."""
    if name == base:
        return True, "", ""
    if not name.startswith(base):
        return False, "", ""
    rest = name[len(base):]
    if rest.startswith("_"):
        unit = rest[1:].strip()
        return True, unit, "" if unit else "the unit after '_' is empty"
    rest = rest.lstrip(" ")
    if rest.startswith("["):
        if not rest.endswith("]"):
            return True, "", "the unit has no closing ']'"
        unit = rest[1:-1].strip()
        return True, unit, "" if unit else "the unit in [] is empty"
    return False, "", ""


def _layout(names: Sequence[str], where: str):
    """The columns T_K, B_T, y and sigma of a header and the unit of y;
    other columns are ignored."""
    cols: Dict[str, str] = {}
    units = {"y": "", "sigma": ""}
    for n in names:
        if n in ("T_K", "B_T"):
            role = n
        else:
            role = None
            for base in ("y", "sigma"):
                is_role, unit, bad = _role(n, base)
                if is_role:
                    if bad:
                        raise _invalid(where, f"column {n!r}: {bad}")
                    role, units[base] = base, unit
                    break
        if role is None:
            continue
        if role in cols:
            raise _invalid(where, f"a second {role} column ({cols[role]!r} and {n!r})")
        cols[role] = n
    missing = [c for c in ("T_K", "B_T", "y") if c not in cols]
    if missing:
        raise _invalid(where, f"no column {', '.join(missing)} (the columns are T_K, B_T, y or y_UNIT, "
                              f"and optionally sigma; have {list(names)})")
    if "sigma" in cols and units["sigma"] and units["sigma"] != (units["y"] or "1"):
        raise _invalid(where, f"the unit of {cols['sigma']!r} differs from that of {cols['y']!r}")
    return cols, units["y"] or "1"


def _read_csv(path: str, field: str):
    """The columns of a CSV file by header name, as compare.ReadCSV reads
    it: the first line that is neither blank nor a comment ('#') is the
    header, blank lines, comment lines and lines of only commas are skipped,
    fields are trimmed, there is no quoting."""
    try:
        with open(path, encoding="utf-8-sig", newline="") as f:
            lines = f.read().splitlines()
    except OSError as e:
        raise _invalid(field, f"cannot read the data file: {e}") from None
    header, columns = None, {}
    name = os.path.basename(path)
    for number, text in enumerate(lines, start=1):
        stripped = text.strip()
        if not stripped or stripped.startswith("#"):
            continue
        items = [item.strip() for item in text.split(",")]
        if not any(items):
            continue
        if header is None:
            header = items
            columns = {h: [] for h in header}
            continue
        if len(items) != len(header):
            raise _invalid(field, f"{name}:{number}: {len(items)} fields, the header has {len(header)}")
        for h, v in zip(header, items):
            columns[h].append(v)
    if header is None:
        raise _invalid(field, f"{name}: no header line (the header names the columns T_K, B_T, y)")
    return columns


def to_measured_data(data: Any, field: str = "data", name: Optional[str] = None) -> frustum_pb2.MeasuredData:
    """MeasuredData from a message, a pandas DataFrame or a dict of arrays
    with columns T_K, B_T, y and optionally sigma, or the path of a CSV file
    with that header. The value column may carry its unit, y_UNIT or
    y[UNIT] (y_percent), and so may sigma (the same unit); other columns are
    ignored, as the command line's reader does. Every column must have one
    value per point; the server checks T > 0, sigma > 0 and that no (T, B)
    point comes twice."""
    if isinstance(data, frustum_pb2.MeasuredData):
        return data
    if isinstance(data, (str, os.PathLike)):
        path = os.fspath(data)
        data = _read_csv(path, field)
        name = name or os.path.basename(path)
    if hasattr(data, "columns") and hasattr(data, "to_dict"):  # a pandas DataFrame
        data = {str(c): data[c].to_numpy() for c in data.columns}
    if not isinstance(data, Mapping):
        raise _invalid(field, f"want a DataFrame, a dict of arrays or a CSV path, got {type(data).__name__}")
    cols, unit = _layout([str(k) for k in data], field)

    def column(role: str) -> List[float]:
        vals = data[cols[role]]
        if isinstance(vals, str) or not hasattr(vals, "__len__"):
            vals = [vals]
        where = f"{field}.{cols[role]}"
        return to_numbers([_number(v, where) if isinstance(v, str) else v for v in vals], where)

    msg = frustum_pb2.MeasuredData(name=name or "", value_unit=unit)
    msg.temperature.extend(column("T_K"))
    msg.field.extend(column("B_T"))
    msg.value.extend(column("y"))
    if "sigma" in cols:
        msg.sigma.extend(column("sigma"))
    n = len(msg.value)
    if n == 0:
        raise _invalid(field, "no data points")
    for role, arr in (("T_K", msg.temperature), ("B_T", msg.field), ("sigma", msg.sigma)):
        if role in cols and len(arr) != n:
            raise _invalid(field, f"column {cols[role]} has {len(arr)} values, {cols['y']} has {n}")
    return msg
