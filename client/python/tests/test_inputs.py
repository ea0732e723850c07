"""Tests of the client's own conversions, without a server: clusters, grids,
fit parameters, measured data, the decoding of error details and the result
wrappers. The expected values are written out by hand from the rules stated
in the docstrings of frustum_client.inputs and in grid/grid.go (the grid
syntax of the command line)."""

import json
import os
import tempfile
import unittest

import grpc
import numpy as np
import pandas as pd

import support  # also puts the package on sys.path

from google.protobuf import any_pb2

from frustum_client import Client, FieldViolation, InvalidArgument, grid
from frustum_client import errors
from frustum_client.frustum.v1 import frustum_pb2, jobs_pb2
from frustum_client.inputs import to_cluster, to_fit_parameter, to_measured_data, to_numbers, to_vector
from frustum_client.results import FitResult, MagnetizationResult, wrap
from frustum_client.rpc import status_pb2

DIMER = os.path.join(support.TESTDATA, "dimer.json")


class ClusterInput(unittest.TestCase):
    def test_forms_agree(self):
        with open(DIMER) as f:
            text = f.read()
        from_path = to_cluster(DIMER)
        self.assertEqual(to_cluster(json.loads(text)), from_path)
        self.assertEqual(to_cluster(text), from_path)
        self.assertIs(to_cluster(from_path), from_path)
        self.assertEqual([s.label for s in from_path.sites], ["a", "b"])
        self.assertEqual(from_path.bonds[0].exchange, 10.0)
        self.assertFalse(from_path.bonds[0].HasField("exchange_z"))

    def test_camel_and_proto_names(self):
        a = to_cluster({"name": "x", "sites": [{"label": "a", "gTensor": [2] * 9}],
                        "bonds": [{"a": "a", "b": "b", "exchangeZ": 3}]})
        b = to_cluster({"name": "x", "sites": [{"label": "a", "g_tensor": [2] * 9}],
                        "bonds": [{"a": "a", "b": "b", "exchange_z": 3}]})
        self.assertEqual(a, b)

    def test_unknown_key(self):
        with self.assertRaises(InvalidArgument) as cm:
            to_cluster({"name": "x", "sites": [{"label": "a", "spinn": 1}]})
        self.assertEqual(cm.exception.field, "cluster")
        self.assertIn("spinn", str(cm.exception))
        self.assertIsInstance(cm.exception, ValueError)

    def test_missing_file(self):
        with self.assertRaises(InvalidArgument) as cm:
            to_cluster(os.path.join(support.TESTDATA, "no-such-cluster.json"), field="models[1]")
        self.assertEqual(cm.exception.field, "models[1]")

    def test_not_a_cluster(self):
        with self.assertRaises(InvalidArgument):
            to_cluster(42)


class GridInput(unittest.TestCase):
    # The forms of grid/grid.go: both ends of a range are included and exact.
    def test_linear(self):
        g = grid("0:15:61")
        self.assertEqual(len(g), 61)
        self.assertEqual(g[0], 0.0)
        self.assertEqual(g[-1], 15.0)
        self.assertEqual(g[4], 1.0)

    def test_log(self):
        g = grid("log:0.5:300:100")
        self.assertEqual(len(g), 100)
        self.assertEqual((g[0], g[-1]), (0.5, 300.0))
        ratios = np.diff(np.log(g))
        np.testing.assert_allclose(ratios, ratios[0], rtol=1e-9)

    def test_list_and_negative(self):
        self.assertEqual(grid("1, 2,5"), [1.0, 2.0, 5.0])
        self.assertEqual(grid("-1,0,0"), [-1.0, 0.0, 0.0])
        self.assertEqual(grid("15:0:4"), [15.0, 10.0, 5.0, 0.0])

    def test_errors(self):
        for bad in ["", "1:2", "1,2:3:4", "0:1:1", "log:0:1:5", "2:2:5", "nan", "1e999", "0x10", "a"]:
            with self.subTest(bad=bad), self.assertRaises(InvalidArgument):
                grid(bad)

    def test_numbers(self):
        self.assertEqual(to_numbers(5, "t"), [5.0])
        self.assertEqual(to_numbers(np.array([1, 2]), "t"), [1.0, 2.0])
        self.assertEqual(to_numbers("1:2:3", "t"), [1.0, 1.5, 2.0])
        with self.assertRaises(InvalidArgument) as cm:
            to_numbers([1, float("nan")], "temperatures")
        self.assertEqual(cm.exception.field, "temperatures[1]")
        self.assertEqual(to_vector(None, "field"), [])
        self.assertEqual(to_vector("0,0,10", "field"), [0.0, 0.0, 10.0])
        with self.assertRaises(InvalidArgument):
            to_vector([1, 2], "direction")


class FitParameterInput(unittest.TestCase):
    def test_string_form(self):
        p = to_fit_parameter("Jc=bonds[6].exchange,bonds[7].exchange:0:50", "vary[0]")
        self.assertEqual(p.name, "Jc")
        self.assertEqual(list(p.paths), ["bonds[6].exchange", "bonds[7].exchange"])
        self.assertEqual((p.min, p.max), (0.0, 50.0))
        self.assertFalse(p.HasField("start"))

    def test_open_bounds_and_start(self):
        p = to_fit_parameter("g=sites[0].g::3:2.1", "vary[0]")
        self.assertFalse(p.HasField("min"))
        self.assertEqual((p.max, p.start), (3.0, 2.1))
        q = to_fit_parameter("g=sites[0].g", "vary[0]")
        self.assertFalse(q.HasField("min") or q.HasField("max") or q.HasField("start"))

    def test_dict_form(self):
        p = to_fit_parameter({"name": "J", "paths": "bonds[0].exchange", "min": 1, "start": 8}, "vary[0]")
        self.assertEqual(list(p.paths), ["bonds[0].exchange"])
        self.assertEqual((p.min, p.start), (1.0, 8.0))
        self.assertFalse(p.HasField("max"))

    def test_errors(self):
        for bad in ["J", "=bonds[0].exchange", "J=", "J=bonds[0].exchange:1", "J=bonds[0].exchange:a:b",
                    {"name": "J"}, {"name": "J", "paths": ["x"], "low": 1}, 3]:
            with self.subTest(bad=bad), self.assertRaises(InvalidArgument) as cm:
                to_fit_parameter(bad, "vary[2]")
            self.assertTrue(cm.exception.field.startswith("vary[2]"))


class MeasuredDataInput(unittest.TestCase):
    def test_csv(self):
        with tempfile.TemporaryDirectory() as d:
            path = os.path.join(d, "points.csv")
            with open(path, "w") as f:
                f.write("\ufeff# invented points\n\nT_K, B_T ,y_muB,sigma_muB\n2,1,0.5,0.01\n,,,\n# a comment\n2,2,0.8,0.01\n")
            m = to_measured_data(path)
        self.assertEqual(m.name, "points.csv")
        self.assertEqual(m.value_unit, "muB")
        self.assertEqual(list(m.temperature), [2.0, 2.0])
        self.assertEqual(list(m.field), [1.0, 2.0])
        self.assertEqual(list(m.value), [0.5, 0.8])
        self.assertEqual(list(m.sigma), [0.01, 0.01])

    def test_dict_and_dataframe(self):
        d = {"T_K": [2, 5], "B_T": np.array([1.0, 1.0]), "y": [0.1, 0.2]}
        m = to_measured_data(d)
        self.assertEqual(m.value_unit, "1")
        self.assertEqual(list(m.sigma), [])
        self.assertEqual(to_measured_data(pd.DataFrame(d)), m)

    def test_header_rules(self):
        # compare.ReadCSV's header: y, y_UNIT or y[UNIT]; sigma likewise with
        # the same unit; other columns are ignored.
        m = to_measured_data({"T_K": [2], "B_T": [1], "y[percent]": [3], "sigma_percent": [0.1], "run": [7]})
        self.assertEqual((m.value_unit, list(m.sigma)), ("percent", [0.1]))
        for bad in [{"T_K": [1], "B_T": [1], "y_": [1]}, {"T_K": [1], "B_T": [1], "y[a": [1]},
                    {"T_K": [1], "B_T": [1], "y_a": [1], "sigma_b": [1]},
                    {"T_K": [1], "B_T": [1], "y": [1], "y_a": [1]}, {"t_k": [1], "B_T": [1], "y": [1]}]:
            with self.subTest(bad=bad), self.assertRaises(InvalidArgument):
                to_measured_data(bad)

    def test_demo_data_file(self):
        m = to_measured_data(os.path.join(support.TESTDATA, "demo-data.csv"))
        self.assertEqual(m.name, "demo-data.csv")
        self.assertEqual(m.value_unit, "percent")
        self.assertEqual(len(m.temperature), len(m.value))
        self.assertEqual(len(m.sigma), len(m.value))
        self.assertTrue(all(t > 0 for t in m.temperature))

    def test_errors(self):
        for bad in [{"T_K": [1], "B_T": [1]}, {"T_K": [1, 2], "B_T": [1], "y": [1, 2]},
                    {"T_K": [], "B_T": [], "y": []}, {"T_K": [1], "B_T": [1], "y": [1], "sigma": [1, 2]}]:
            with self.subTest(bad=bad), self.assertRaises(InvalidArgument):
                to_measured_data(bad)

    def test_fit_spec(self):
        spec = Client._fit_spec({"T_K": [2], "B_T": [1], "y": [0.3]}, DIMER, "polarization",
                                "J=bonds[0].exchange:1:40", link="per-temperature", scaling_g=2.1)
        self.assertFalse(spec.HasField("cluster"))
        self.assertEqual(spec.WhichOneof("task"), "fit")
        self.assertEqual(len(spec.fit.models), 1)
        self.assertEqual(spec.fit.vary[0].name, "J")
        self.assertEqual(spec.fit.link, "per-temperature")
        self.assertEqual(spec.fit.scaling_g, 2.1)
        self.assertFalse(Client._fit_spec({"T_K": [2], "B_T": [1], "y": [0.3]}, DIMER, "moment", []).fit
                         .HasField("scaling_g"))


class _FakeRpcError:
    """What grpc gives for a failed call: code(), details(), trailing_metadata()."""

    def __init__(self, code, details, trailers):
        self._code, self._details, self._trailers = code, details, trailers

    def code(self):
        return self._code

    def details(self):
        return self._details

    def trailing_metadata(self):
        return self._trailers


def _any(name, msg):
    return any_pb2.Any(type_url="type.googleapis.com/" + name, value=msg.SerializeToString())


class ErrorDecoding(unittest.TestCase):
    # The details that server/errors.go attaches: ErrorInfo{reason, domain
    # "frustum", metadata}, BadRequest field violations, QuotaFailure.
    def test_bad_request(self):
        st = status_pb2.Status(code=3, message="spec.cluster.bonds[0].b: unknown site", details=[
            _any("google.rpc.ErrorInfo", status_pb2.ErrorInfo(reason="INVALID_SPEC", domain="frustum")),
            _any("google.rpc.BadRequest", status_pb2.BadRequest(field_violations=[
                status_pb2.BadRequest.FieldViolation(field="spec.cluster.bonds[0].b", description="unknown site")])),
        ])
        err = errors.from_rpc_error(_FakeRpcError(grpc.StatusCode.INVALID_ARGUMENT, st.message,
                                                  [("grpc-status-details-bin", st.SerializeToString())]))
        self.assertIsInstance(err, InvalidArgument)
        self.assertEqual((err.code, err.reason, err.field), ("INVALID_ARGUMENT", "INVALID_SPEC", "spec.cluster.bonds[0].b"))
        self.assertEqual(err.fields, [FieldViolation("spec.cluster.bonds[0].b", "unknown site")])

    def test_quota(self):
        st = status_pb2.Status(code=8, message="too large", details=[
            _any("google.rpc.ErrorInfo", status_pb2.ErrorInfo(reason="MEMORY_LIMIT", domain="frustum",
                                                              metadata={"need_bytes": "10", "limit_bytes": "5"})),
            _any("google.rpc.QuotaFailure", status_pb2.QuotaFailure(violations=[
                status_pb2.QuotaFailure.Violation(subject="memory", description="needs 10 B, allows 5 B")])),
        ])
        err = errors.from_rpc_error(_FakeRpcError(grpc.StatusCode.RESOURCE_EXHAUSTED, "too large",
                                                  [("grpc-status-details-bin", st.SerializeToString())]))
        self.assertIsInstance(err, errors.ResourceExhausted)
        self.assertEqual(err.metadata, {"need_bytes": "10", "limit_bytes": "5"})
        self.assertEqual(err.quota, ["needs 10 B, allows 5 B"])
        self.assertIsNone(err.field)

    def test_no_details(self):
        err = errors.from_rpc_error(_FakeRpcError(grpc.StatusCode.UNAVAILABLE, "connection refused", []))
        self.assertIsInstance(err, errors.Unavailable)
        self.assertIsNone(err.reason)
        bad = errors.from_rpc_error(_FakeRpcError(grpc.StatusCode.NOT_FOUND, "x",
                                                  [("grpc-status-details-bin", b"\xff\xff")]))
        self.assertIsInstance(bad, errors.NotFound)

    def test_job_errors(self):
        failed = jobs_pb2.Job(name="jobs/1", state=jobs_pb2.Job.FAILED, error=jobs_pb2.JobError(
            code="INVALID_ARGUMENT", message="bonds[0].b: unknown",
            field_violations=[jobs_pb2.FieldViolation(field="spec.cluster.bonds[0].b", description="unknown")]))
        e = errors.from_job(failed)
        self.assertIsInstance(e, errors.JobFailed)
        self.assertEqual((e.code, e.field, e.job), ("INVALID_ARGUMENT", "spec.cluster.bonds[0].b", "jobs/1"))
        c = errors.from_job(jobs_pb2.Job(name="jobs/2", state=jobs_pb2.Job.CANCELLED))
        self.assertIsInstance(c, errors.Cancelled)


class ResultWrappers(unittest.TestCase):
    def test_magnetization(self):
        msg = frustum_pb2.MagnetizationResult(cluster_name="x", field=[0, 1, 2], direction=[0, 0, 1], saturation=2,
                                              curves=[
            frustum_pb2.MagnetizationCurve(temperature=2, magnetization=[0, 0.5, 0.9],
                                           groups={"c": frustum_pb2.GroupCurve(values=[0, 0.2, 0.4])}),
            frustum_pb2.MagnetizationCurve(temperature=5, magnetization=[0, 0.3, 0.6],
                                           groups={"c": frustum_pb2.GroupCurve(values=[0, 0.1, 0.2])}),
        ])
        r = wrap(msg, job="jobs/9")
        self.assertIsInstance(r, MagnetizationResult)
        self.assertEqual(r.magnetization.shape, (2, 3))
        self.assertEqual(r.groups["c"][1, 2], 0.2)
        self.assertIsNone(r.susceptibility)
        self.assertIsNone(r.powder)
        np.testing.assert_array_equal(r.curve(4.9), [0, 0.3, 0.6])
        df = r.to_dataframe()
        self.assertEqual(list(df.columns), ["T_K", "B_T", "M_muB", "M_c_muB"])
        self.assertEqual(len(df), 6)
        self.assertEqual(df.iloc[4].tolist(), [5.0, 1.0, 0.3, 0.1])

    def test_fit(self):
        msg = frustum_pb2.FitResult(observable="polarization", link="global", temperature=[2, 2], field=[1, 2],
                                    value=[0.4, 0.7], sigma=[0.1, 0.1], scaling=[0.3, 0.6], best="m1", models=[
            frustum_pb2.ModelFit(name="m1", chi_square=1.5, degrees_of_freedom=1, reduced_chi_square=1.5, aic=5.5,
                                 bic=4.0, curve=[0.41, 0.69], residual=[-0.1, 0.1],
                                 parameters=[frustum_pb2.FittedParameter(name="J", value=12.0, error=0.5, unit="K",
                                                                         paths=["bonds[0].exchange"])],
                                 links=[frustum_pb2.LinkCoefficients(scale=1.0, offset=0.01)]),
            frustum_pb2.ModelFit(name="free spin 1/2", baseline=True, chi_square=9, aic=13, bic=12),
        ])
        r = wrap(msg)
        self.assertIsInstance(r, FitResult)
        self.assertIs(r.best, r.models["m1"])
        self.assertIs(r.models[1], r.models["free spin 1/2"])
        p = r.best.parameters["J"]
        self.assertEqual((p.value, p.error, p.unit), (12.0, 0.5, "K"))
        self.assertIsNone(r.best.links[0].temperature)
        table = r.table()
        self.assertEqual(list(table["name"]), ["m1", "free spin 1/2"])
        self.assertEqual(list(table["delta_aic"]), [0.0, 7.5])
        self.assertIn("J = 12", table["parameters"][0])
        self.assertEqual(len(r.to_dataframe()), 4)
        with self.assertRaises(KeyError):
            r.models["m3"]


if __name__ == "__main__":
    unittest.main()
