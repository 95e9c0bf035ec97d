"""Write a self-contained published dashboard folder.

The folder holds these five files, nothing a viewer should not download and nothing the
server would hand out (voila serves none of the folder's files; see :mod:`levelwise.dashboards.hardening`):

- ``present.ipynb`` — the read-only stakeholder notebook (one import and one call);
- ``study.json`` — the study it shows;
- ``voila.json`` — the hardened voila configuration;
- ``README.md`` — how to run it;
- ``optimum.json`` — the best settings for the study's goals, searched once here (see
  :mod:`levelwise.dashboards.stored_optimum`); optional: without it, or when it does not match the study,
  the page searches itself.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

from levelwise import LevelwiseError, Study

from . import NOTEBOOKS
from .hardening import voila_config
from .study_source import STUDY_FILE

#: Every file a published folder must hold.
PUBLISHED_FILES = ("present.ipynb", STUDY_FILE, "voila.json", "README.md")
#: The file ``publish`` adds when the study records goals (:mod:`.stored_optimum`); a folder without it still works.
OPTIONAL_FILES = ("optimum.json",)

README = """# {title}: read-only dashboard

This folder was written by `levelwise publish`. It holds:

- `present.ipynb`: the read-only dashboard (the study summary, the effect sliders with their
  traces and intervals, the surface slice, the predictions and the optimum);
- `study.json`: the study it shows (the data file; the server never hands it out);
- `voila.json`: the hardened server configuration;
- `optimum.json`: the best settings for the study's goals, searched once when publishing (the page
  searches again itself if this file is missing or does not match `study.json`);
- this README.

## Run it

With levelwise installed (`pip install levelwise`):

```sh
levelwise view .              # http://127.0.0.1:8866/ on this machine only
levelwise view . --port 9000 --ip 0.0.0.0 --token SECRET   # others on your network, with a token
```

`levelwise view` starts voila's standalone server on `present.ipynb` with: sources stripped,
tracebacks hidden, no file of this folder served, kernels preheated, idle kernels shut down after
{cull} s, one BLAS thread per kernel, and a kernel websocket that refuses (HTTP 400) clients not
speaking the `v1.kernel.websocket.jupyter.org` protocol, checks every frame before it is parsed,
limits each connection's message rate and keeps the kernel's errors in the server log. It also
bounds the viewers' kernels (`--max-kernels`, default sized to the machine's memory;
`--max-kernels-per-client`, default 3): past a limit a viewer gets a "busy, try again" page.
Plain `OPENBLAS_NUM_THREADS=1 voila present.ipynb` run inside this folder reads `voila.json` here
and applies every setting but the kernel limits.

Each viewer gets their own kernel (about 200 MB of memory for the demo campaign). A page left idle
for {cull} s loses its kernel: reload it. For large audiences, share the offline export instead
(`levelwise export-html`): one file, no kernel.

## Read this before you act on a number

Predictions hold only inside the tested region. Confirm with validation runs before changing a
process. Defer to your site's safety review, local codes and licensed practice.
"""


def publish(study, out) -> Path:
    """Write the published folder for *study* (a study JSON path, or ``"demo"``) into *out*.

    Parameters
    ----------
    study : str or pathlib.Path
    out : str or pathlib.Path
        A folder that does not exist yet or is empty.

    Returns
    -------
    pathlib.Path
        The folder written.

    Raises
    ------
    LevelwiseError
        *out* exists and is not an empty folder, or the study cannot be read.
    """
    from .study_source import open_study, study_path, title_of

    out = Path(out)
    if out.exists() and (not out.is_dir() or any(out.iterdir())):
        raise LevelwiseError(
            f"The output folder {str(out)!r} must not exist yet or be empty (a published folder holds only "
            f"{', '.join(PUBLISHED_FILES + OPTIONAL_FILES)}). Choose a new folder."
        )
    source = open_study(study)  # read it first: a study that does not load is not published
    path = study_path(study)
    out.mkdir(parents=True, exist_ok=True)
    shutil.copyfile(NOTEBOOKS / "present.ipynb", out / "present.ipynb")
    target = out / STUDY_FILE
    shutil.copyfile(path, target)  # the file exactly as it was read
    config = voila_config()
    (out / "voila.json").write_text(json.dumps(config, indent=2) + "\n", encoding="utf-8")
    cull = config["MappingKernelManager"]["cull_idle_timeout"]
    (out / "README.md").write_text(README.format(title=title_of(source), cull=cull), encoding="utf-8")
    store_optimum(out)
    return out


def store_optimum(folder) -> Path | None:
    """Search the published page's optimum once, as the page would, and store it beside the study
    (:mod:`.stored_optimum`): every viewer's kernel then shows it without running the search."""
    from . import stored_optimum
    from ._compose import find_view
    from .present import set_study_goals
    from .study_source import shared_model

    study_file = Path(folder) / STUDY_FILE
    shared = shared_model(Study.load(study_file), read_only=True)
    view_class = find_view("OptimizerView")
    if view_class is None:
        return None
    view = view_class(shared)
    if not set_study_goals(view):
        return None
    from threadpoolctl import threadpool_limits

    try:
        with threadpool_limits(1):  # one BLAS thread, as in the viewers' kernels: the same numbers as their search
            view.run()  # no event loop here: the search runs at once
    except LevelwiseError:
        return None  # the page will say why
    return stored_optimum.write(folder, study_file, view)
