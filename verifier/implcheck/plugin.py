"""pytest plugin (entry point ``pytest11``): a rule pack as the test oracle of your code.

On the command line::

    pytest --verifier-pack rules/position-report.toml --verifier-impl mypkg.onboard:report

adds one test item per rule of each pack (named ``verifier::<pack>::<rule id>``); a failing
item prints the counterexample's story. Given no test paths, such a run collects only those
items (not the ``testpaths`` of the project's configuration); name test files or folders to
run them as well. A pack or an implementation that cannot be loaded is one usage error line
(exit 4), as ``verifier test`` makes it exit 2. In your own tests::

    @pytest.mark.verifier_pack("rules/position-report.toml")
    def test_report(verifier_rules):
        verifier_rules.check(my_report)

The Hypothesis settings in force (the active profile: ``max_examples``, ``database``,
``derandomize``) decide the generated worlds; the solver's worlds and archived counterexamples
come first, as in ``verifier test``. Nothing here is imported until a test needs it, so the
plugin costs nothing in a run that does not use it.
"""

from __future__ import annotations

from pathlib import Path

import pytest


def pytest_addoption(parser):
    g = parser.getgroup("verifier", "rule packs as test oracles (verifier)")
    g.addoption("--verifier-pack", action="append", default=[], metavar="PACK",
                help="check every rule of PACK against --verifier-impl (repeatable)")
    g.addoption("--verifier-impl", metavar="MODULE:FUNCTION", help="the onboard implementation")
    g.addoption("--verifier-trackside-impl", metavar="MODULE:FUNCTION", help="a trackside implementation")
    g.addoption("--verifier-path", action="append", default=[], metavar="DIR",
                help="put DIR on the import path (repeatable)")
    g.addoption("--verifier-out", metavar="DIR", help="write counterexample files under DIR")
    g.addoption("--verifier-no-smt", action="store_true", help="no worlds from the solver")


def _only_rules(config) -> bool:
    """A --verifier-pack run without test paths of its own: collect nothing but the rules."""
    if not config.getoption("verifier_pack", None):
        return False
    source = getattr(config, "args_source", None)
    return source is not None and source is not pytest.Config.ArgsSource.ARGS


def pytest_ignore_collect(collection_path, config):
    if _only_rules(config):
        return True
    return None


def pytest_configure(config):
    config.addinivalue_line("markers", "verifier_pack(*paths): the rule packs the verifier_rules "
                                       "fixture checks an implementation against")
    config.addinivalue_line("markers", "verifier: a rule of a pack checked against an implementation "
                                       "(added by --verifier-pack)")


class RuleFailed(Exception):
    pass


def _options(config):
    from hypothesis import settings

    from verifier.implcheck.runner import ImplOptions
    out = config.getoption("verifier_out")
    return ImplOptions(settings=settings.default, smt=not config.getoption("verifier_no_smt"),
                       out=Path(out) if out else None)


class _Pack:
    """One pack with the implementation, and what its rules share (seeds, memo)."""

    def __init__(self, path: str, config):
        from verifier.errors import PackError, VerifierError
        try:
            self._load(path, config)
        except PackError as exc:
            raise pytest.UsageError("\n".join(d.render() for d in exc.diagnostics)) from None
        except VerifierError as exc:
            raise pytest.UsageError(f"--verifier-pack {path}: {exc}") from None

    def _load(self, path: str, config):
        from verifier.implcheck import interface
        from verifier.run.loader import load_pack
        self.pack = load_pack(path)
        search = tuple(config.getoption("verifier_path")) + tuple(self.pack.implementation.get("path", ()))
        spec = config.getoption("verifier_impl") or self.pack.implementation.get("onboard")
        if not spec:
            raise pytest.UsageError(f"--verifier-pack {path}: give --verifier-impl MODULE:FUNCTION")
        self.onboard = interface.load(spec, search)
        ts = config.getoption("verifier_trackside_impl") or self.pack.implementation.get("trackside")
        self.trackside = interface.load(ts, search) if ts else None
        self.opts = _options(config)
        self._run = None

    def run(self):
        if self._run is None:
            from verifier.implcheck.runner import Session
            self._run = Session(self.pack, self.onboard, self.trackside, self.opts)
        return self._run


class VerifierRuleItem(pytest.Item):
    def __init__(self, *, packrun: _Pack, rule_id: str, **kw):
        super().__init__(**kw)
        self.packrun, self.rule_id = packrun, rule_id
        self.add_marker("verifier")

    def runtest(self):
        session = self.packrun.run()
        outcome = session.rule(self.rule_id)
        printed = session.chk.output.summary()
        printed = f"\n\n({printed})" if printed else ""
        if outcome.status == "failed":
            raise RuleFailed(session.story(outcome) + printed)
        if outcome.status == "not checked":
            pytest.skip(f"not checked: {outcome.message}")
        if session.findings:
            f = session.findings[0]
            raise RuleFailed(f"the implementation broke the interface: {f.kind}: {f.message}"
                             + (f" (at {f.where})" if f.where else "") + printed)

    def repr_failure(self, excinfo):
        if isinstance(excinfo.value, RuleFailed):
            return str(excinfo.value)
        return super().repr_failure(excinfo)

    def reportinfo(self):
        return self.packrun.pack.path, None, f"verifier::{self.packrun.pack.name}::{self.rule_id}"


class VerifierPackCollector(pytest.Collector):
    def __init__(self, *, packrun: _Pack, **kw):
        super().__init__(**kw)
        self.packrun = packrun

    def collect(self):
        for rule in self.packrun.pack.rules:
            yield VerifierRuleItem.from_parent(self, name=rule.id, packrun=self.packrun, rule_id=rule.id)


def pytest_collection_modifyitems(session, config, items):
    packs = config.getoption("verifier_pack")
    if not packs:
        return
    for path in packs:
        packrun = _Pack(path, config)
        name = f"verifier::{packrun.pack.name}"
        col = VerifierPackCollector.from_parent(session, name=name, nodeid=name, packrun=packrun)
        mine = list(col.collect())
        # reported as collected, so that the counts of the run ("15 tests collected") include them
        config.hook.pytest_collectreport(report=pytest.CollectReport(name, "passed", None, mine))
        items.extend(mine)


class Oracle:
    """The ``verifier_rules`` fixture: ``check(onboard, trackside=None)`` runs every rule of the
    packs against the callables and fails the test with each failing rule's story."""

    def __init__(self, paths, config):
        self.paths = list(paths)
        self.config = config

    def check(self, onboard, trackside=None, *, rules=()):
        import attrs

        from verifier.implcheck import interface
        from verifier.implcheck.runner import Session
        from verifier.run.loader import load_pack
        if not self.paths:
            raise pytest.UsageError("verifier_rules: name the packs with @pytest.mark.verifier_pack(...) "
                                    "or --verifier-pack")
        problems = []
        for path in self.paths:
            pack = load_pack(path)
            opts = attrs.evolve(_options(self.config), rules=tuple(rules))
            run = Session(pack, interface.wrap(onboard),
                          interface.wrap(trackside) if trackside else None, opts)
            for f in run.findings:
                problems.append(f"{pack.name}: the implementation broke the interface: {f.kind}: {f.message}")
            for r in run.all():
                if r.status == "failed":
                    problems.append(f"{pack.name}/{r.rule} failed\n{run.story(r)}")
        if problems:
            raise AssertionError("\n\n".join(problems))


@pytest.fixture
def verifier_rules(request):
    marker = request.node.get_closest_marker("verifier_pack")
    paths = list(marker.args) if marker else request.config.getoption("verifier_pack")
    return Oracle(paths, request.config)
