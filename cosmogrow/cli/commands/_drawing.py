"""The four figures of a fit, drawn by two forked processes while the parent finishes the fit.

The first drawer is forked before the MAP: it imports the plotting libraries (matplotlib, corner;
about half a second) on the second core while the parent samples, then forks the second, and both
wait for work. The corner, offsets and relation figures need only the chain: they are sent the
moment it ends and are drawn while the parent computes the verdicts; the cross-check figure is
sent with the summary. Each figure is a named job, ``FIGURES[name](folder, config, data, payload)``:
the payload holds what the chain or the summary adds (small, sent through a pipe), the catalogue
and configuration are those the drawers were forked with.

A figure a drawer could not draw is drawn again in the parent, so its error surfaces as usual;
without fork or a free second core every figure is drawn in the parent.
"""

import multiprocessing
import os

#: Which drawer draws which figure, in the order they are sent (N = 1e4: the corner plot, 1.4 s,
#: against relation and offsets, 1.0 s, then the cross-check, 0.5 s, sent after the verdicts).
DRAWER_OF = {"corner.png": 0, "relation.png": 1, "offsets.png": 1, "crosscheck.png": 1}


def _corner(folder, config, data, payload):
    from ...report.fit_figures import corner_figure

    corner_figure(payload["samples"], payload["names"], folder / "corner.png")


def _offsets(folder, config, data, payload):
    from ...report.fit_figures import offsets_figure

    offsets_figure(data.catalog, payload["summary"], payload["k_draws"], config.model, folder / "offsets.png",
                   payload["method_offsets"], payload["host_offsets"])


def _relation(folder, config, data, payload):
    from ...report.fit_figures import relation_figure

    relation_figure(data.catalog, payload["summary"], config.model, folder / "relation.png")


def _crosscheck(folder, config, data, payload):
    from ...report.check_figures import crosscheck_figure

    crosscheck_figure(payload["crosscheck"], payload["k"], folder / "crosscheck.png")


FIGURES = {"corner.png": _corner, "offsets.png": _offsets, "relation.png": _relation,
           "crosscheck.png": _crosscheck}


def chain_payloads(model, chain) -> dict:
    """{figure: payload} of the figures drawn from the chain alone (parameter medians as in the
    summary: `inference.summary.describe_parameters` of the same draws)."""
    from ...inference.summary import describe_parameters

    samples = chain.samples
    parameters = describe_parameters(model.names, samples)
    layout = model.layout
    medians = layout.from_dict({name: row["median"] for name, row in parameters.items()})
    summary = {"parameters": parameters}
    return {"corner.png": {"samples": samples, "names": list(model.names)},
            "offsets.png": {"summary": summary, "k_draws": samples[:, layout.index_k],
                            "method_offsets": layout.offsets_by_label(medians, "method"),
                            "host_offsets": layout.offsets_by_label(medians, "host_type")},
            "relation.png": {"summary": summary}}


def summary_payloads(summary: dict) -> dict:
    """{figure: payload} of the figures that need the fit's summary."""
    return {"crosscheck.png": {"crosscheck": summary.get("crosscheck"), "k": summary["k"]}}


class FigureDrawers:
    """Two drawing processes (none when fork is missing or fewer than two cores are free).

    Use as a context manager: `submit` figures as their payloads become ready, `finish` at the end;
    leaving the block by an exception ends the processes before the results folder is removed.
    """

    def __init__(self, folder, config, data, *, processes: int = 2):
        self.folder, self.config, self.data = folder, config, data
        self.payloads = {}
        self.process, self.connections = None, []
        if processes and "fork" in multiprocessing.get_all_start_methods() and len(os.sched_getaffinity(0)) >= 2:
            pipes = [multiprocessing.Pipe() for _ in range(processes)]
            self.process = multiprocessing.get_context("fork").Process(
                target=_serve, args=([child for _, child in pipes], os.getpid(), folder, config, data), daemon=True)
            self.process.start()
            for parent_end, child_end in pipes:
                child_end.close()
                self.connections.append(parent_end)

    def __enter__(self):
        return self

    def __exit__(self, kind, value, traceback):
        for connection in self.connections:
            connection.close()
        if self.process is not None:
            if self.process.is_alive():
                self.process.kill()  # its own forked drawer dies with it
            self.process.join()
        self.process, self.connections = None, []

    def submit(self, payloads: dict) -> None:
        """Start drawing these figures ({figure: payload}) in their drawer, or keep them for `finish`."""
        self.payloads.update(payloads)
        for name, payload in payloads.items():
            if self.connections:
                self.connections[DRAWER_OF[name] % len(self.connections)].send((name, payload))

    def finish(self) -> None:
        """Wait for the drawers, then draw here every submitted figure they did not draw."""
        drawn = set()
        for connection in self.connections:
            try:
                connection.send(None)
                drawn.update(connection.recv())
            except (EOFError, OSError):  # the drawer died: its figures are drawn below
                pass
        self.__exit__(None, None, None)
        for name, payload in self.payloads.items():
            if name not in drawn or not (self.folder / name).is_file():
                FIGURES[name](self.folder, self.config, self.data, payload)


def _serve(connections, parent_pid, folder, config, data):
    """The first drawer: import the plotting stack, fork the other drawers from here (so the stack is
    imported once), then draw the jobs of the first connection."""
    from ...inference.forked import die_with_parent

    die_with_parent(parent_pid)
    from ...report import check_figures, fit_figures  # noqa: F401  (imported now, while the parent samples)

    fit_figures.preload()

    mine, *others = connections
    here, children = os.getpid(), []
    for connection in others:
        pid = os.fork()
        if pid == 0:
            die_with_parent(here)
            _draw_jobs(connection, folder, config, data)
            os._exit(0)
        children.append(pid)
        connection.close()
    _draw_jobs(mine, folder, config, data)
    for pid in children:
        os.waitpid(pid, 0)


def _draw_jobs(connection, folder, config, data):
    """Draw each (figure, payload) received until None, then answer the names drawn."""
    drawn = []
    while (job := connection.recv()) is not None:
        name, payload = job
        try:
            FIGURES[name](folder, config, data, payload)
            drawn.append(name)
        except Exception:  # noqa: BLE001 - the parent draws it again and reports the error
            pass
    connection.send(drawn)
    connection.close()
