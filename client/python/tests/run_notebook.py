"""Execute a notebook with nbclient and fail if any cell fails.

    python3 tests/run_notebook.py examples/defect_fit.ipynb OUT.ipynb

The kernel is this interpreter (a kernel spec written to a temporary
directory put first on JUPYTER_PATH), so that a "python3" kernel spec of
some other Python on the machine cannot stand in for it. Cells run in the
notebook's directory; the executed notebook is written to OUT.ipynb, also
when a cell fails. Exit status 0 when every cell ran, 1 otherwise.
"""

import json
import os
import shutil
import sys
import tempfile

KERNEL = "frustum-client-python3"


def main(argv):
    if len(argv) != 3:
        print(__doc__, file=sys.stderr)
        return 2
    src, out = os.path.abspath(argv[1]), os.path.abspath(argv[2])
    spec_root = tempfile.mkdtemp(prefix="frustum-kernel-")
    try:
        kernel_dir = os.path.join(spec_root, "kernels", KERNEL)
        os.makedirs(kernel_dir)
        with open(os.path.join(kernel_dir, "kernel.json"), "w") as f:
            json.dump({
                "argv": [sys.executable, "-m", "ipykernel_launcher", "-f", "{connection_file}"],
                "display_name": "Python 3 (" + sys.executable + ")",
                "language": "python",
                "env": {"PYDEVD_DISABLE_FILE_VALIDATION": "1"},
            }, f)
        os.environ["JUPYTER_PATH"] = os.pathsep.join(p for p in [spec_root, os.environ.get("JUPYTER_PATH", "")] if p)

        import nbclient
        import nbformat

        nb = nbformat.read(src, as_version=4)
        client = nbclient.NotebookClient(nb, kernel_name=KERNEL, timeout=600,
                                         resources={"metadata": {"path": os.path.dirname(src)}})
        status = 0
        try:
            client.execute()
        except nbclient.exceptions.CellExecutionError as e:
            print(f"{src}: a cell failed:\n{e}", file=sys.stderr)
            status = 1
        nbformat.write(nb, out)
        return status
    finally:
        shutil.rmtree(spec_root, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main(sys.argv))
