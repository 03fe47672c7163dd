"""The Docker files, checked without a Docker engine.

Every path the Dockerfile copies and the compose file builds from exists; every command they
run exists: ``boundsvc ...`` argv are parsed by the real CLI parser, ``python -c`` code is
compiled and its imports resolved, ``http://127.0.0.1:8000/...`` probes name real routes;
every ``BOUNDSVC_`` variable is a setting and documented in ``docs/deployment.md``.
"""

from __future__ import annotations

import ast
import importlib.util
import re
import shlex
import tomllib
from pathlib import Path
from typing import Any

import pytest
import yaml

from boundsvc.api.routes import meta
from boundsvc.cli import build_parser

REPO = Path(__file__).resolve().parents[2]
DOCKERFILE = REPO / "docker" / "Dockerfile"
COMPOSE = REPO / "docker" / "compose.yaml"
SETTINGS = REPO / "boundsvc" / "settings.py"
DEPLOYMENT = REPO / "docs" / "deployment.md"

#: Programs of the base image (python:3.11-slim, Debian) and of the postgres image.
SYSTEM_PROGRAMS = {"cd", "pip", "groupadd", "useradd", "mkdir", "chown", "pg_isready"}


def dockerfile_instructions() -> list[tuple[str, str]]:
    """``(INSTRUCTION, arguments)`` with continuation lines joined and comments dropped."""
    logical: list[str] = []
    current = ""
    for raw in DOCKERFILE.read_text(encoding="utf-8").splitlines():
        line = raw.strip()
        if not current and (not line or line.startswith("#")):
            continue
        if line.endswith("\\"):
            current += line[:-1] + " "
            continue
        logical.append(current + line)
        current = ""
    assert not current, "dangling line continuation"
    return [(text.split(None, 1)[0].upper(), text.split(None, 1)[1]) for text in logical]


def _argv(arguments: str) -> list[str]:
    """An exec-form (JSON array) or shell-form command as argv."""
    if arguments.lstrip().startswith("["):
        return list(yaml.safe_load(arguments))
    return shlex.split(arguments)


def _commands(argv: list[str]) -> list[list[str]]:
    """Split a shell command line on ``&&``, ``||`` and ``;``."""
    commands: list[list[str]] = [[]]
    for word in argv:
        if word in ("&&", "||", ";"):
            commands.append([])
        else:
            commands[-1].append(word)
    return [c for c in commands if c]


def check_command(argv: list[str]) -> None:
    """Fail unless the command exists and its arguments make sense."""
    if argv[:1] == ["CMD-SHELL"]:
        for command in _commands(shlex.split(argv[1])):
            check_command(command)
        return
    if argv[:1] == ["CMD"]:
        argv = argv[1:]
    program = argv[0]
    if program == "boundsvc":
        scripts = tomllib.loads((REPO / "pyproject.toml").read_text())["project"]["scripts"]
        assert scripts.get("boundsvc") == "boundsvc.cli:main"
        build_parser().parse_args(argv[1:])  # SystemExit on an unknown command or option
    elif program == "python":
        if argv[1:2] == ["-c"]:
            check_python(argv[2])
        elif argv[1:2] == ["-m"]:
            assert importlib.util.find_spec(argv[2]) is not None, argv
        else:
            pytest.fail(f"unexpected python invocation {argv}")
    elif program not in SYSTEM_PROGRAMS:
        pytest.fail(f"unknown program {program!r} in {argv}")


def check_python(code: str) -> None:
    """Compile ``code``; its imports resolve and the URLs it probes are routes."""
    tree = ast.parse(code)
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for alias in node.names:
                assert importlib.util.find_spec(alias.name) is not None, alias.name
        elif isinstance(node, ast.ImportFrom) and node.module:
            assert importlib.util.find_spec(node.module) is not None, node.module
    routes = {getattr(r, "path", "") for r in meta.router.routes}
    for url in re.findall(r"http://127\.0\.0\.1:8000(/[\w/]*)", code):
        assert url in routes, f"{url} is not a route"


def test_dockerfile_copies_existing_paths_and_runs_existing_commands() -> None:
    instructions = dockerfile_instructions()
    stages = [args.split()[-1] for op, args in instructions if op == "FROM" and " AS " in args]
    assert stages == ["build", "runtime"]  # multi-stage
    copied = 0
    for op, args in instructions:
        if op == "COPY":
            words = args.split()
            if words[0].startswith("--from="):
                assert words[0].split("=", 1)[1] in stages
                continue
            for source in words[:-1]:
                assert (REPO / source).exists(), f"COPY {source}: no such path"
                copied += 1
        elif op in ("RUN", "CMD"):
            for command in _commands(_argv(args)):
                check_command(command)
        elif op == "HEALTHCHECK":
            check_command(_argv(args.split(" CMD ", 1)[1]))
    assert copied >= 3


def test_dockerfile_runtime_choices() -> None:
    instructions = dockerfile_instructions()
    start = next(
        i for i, (op, a) in enumerate(instructions) if op == "FROM" and a.endswith("runtime")
    )
    runtime = instructions[start:]
    users = [a for op, a in runtime if op == "USER"]
    assert users and users[-1] not in ("root", "0")
    env = " ".join(a for op, a in runtime if op == "ENV")
    assert "OPENBLAS_NUM_THREADS=1" in env
    assert any(op == "HEALTHCHECK" for op, _ in runtime)
    smoke = [a for op, a in instructions if op == "RUN" and "import boundsvc.api" in a]
    assert len(smoke) == 2  # in the build stage (out of the source tree) and as the user
    cmd = _argv([a for op, a in runtime if op == "CMD"][-1])
    assert cmd[:2] == ["boundsvc", "serve"] and "--workers" in cmd


def compose() -> dict[str, Any]:
    loaded = yaml.safe_load(COMPOSE.read_text(encoding="utf-8"))
    assert isinstance(loaded, dict)
    return loaded


def test_compose_builds_from_existing_files_and_runs_existing_commands() -> None:
    services = compose()["services"]
    assert {"db", "migrate", "boundsvc"} <= set(services)
    for name, service in services.items():
        build = service.get("build")
        if build:
            context = (COMPOSE.parent / build["context"]).resolve()
            assert context == REPO, name
            assert (context / build["dockerfile"]).resolve() == DOCKERFILE, name
        if "command" in service:
            check_command(list(service["command"]))
        if "healthcheck" in service:
            check_command(list(service["healthcheck"]["test"]))


def test_compose_wires_postgres_with_a_volume_and_health_checks() -> None:
    spec = compose()
    services = spec["services"]
    db = services["db"]
    assert db["image"].startswith("postgres:")
    assert any(v.split(":")[0] in spec["volumes"] for v in db["volumes"])
    assert "healthcheck" in db and "healthcheck" in services["boundsvc"]
    app = services["boundsvc"]
    url = app["environment"]["BOUNDSVC_DATABASE_URL"]
    assert url.startswith("postgresql+psycopg://") and "@db:5432/" in url
    assert app["depends_on"]["db"]["condition"] == "service_healthy"
    assert app["depends_on"]["migrate"]["condition"] == "service_completed_successfully"
    assert services["migrate"]["command"][:3] == ["boundsvc", "db", "upgrade"]


def _settings_variables() -> set[str]:
    return set(re.findall(r'"(BOUNDSVC_[A-Z_]+)"', SETTINGS.read_text(encoding="utf-8")))


def test_every_variable_the_files_set_is_a_setting() -> None:
    known = _settings_variables()
    used = set(re.findall(r"\b(BOUNDSVC_[A-Z_]+)=", DOCKERFILE.read_text()))
    for service in compose()["services"].values():
        used |= {k for k in service.get("environment", {}) if k.startswith("BOUNDSVC_")}
    assert used and used <= known, used - known


def test_deployment_doc_documents_every_setting() -> None:
    documented = set(
        re.findall(r"^\|\s*`(BOUNDSVC_[A-Z_]+)`", DEPLOYMENT.read_text(), re.MULTILINE)
    )
    assert documented == _settings_variables()
