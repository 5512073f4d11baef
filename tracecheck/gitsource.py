"""Git access: the only module that imports gitpython.

Single-purpose functions; every gitpython exception is converted here into a
:class:`~tracecheck.errors.GitError` naming the revision, path or repository.
"""

from __future__ import annotations

import subprocess
import tempfile
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path

from tracecheck.errors import GitError

__all__ = [
    "open_repo",
    "repo_root",
    "read_blob",
    "start_blob",
    "blob_id",
    "resolve",
    "merge_base",
    "is_dirty",
    "head_commit",
    "commit_all",
    "init_repo",
    "tag",
    "create_branch",
    "checkout",
    "find_root",
    "worktree_state",
    "user_name",
    "default_branch",
    "repo_relative",
    "repo_path",
    "commit_id",
    "commit_graph",
    "path_commits",
    "tags_by_commit",
    "blob_at",
    "read_object",
]


@contextmanager
def _converted(what: str) -> Iterator[None]:
    import git

    try:
        yield
    except git.GitCommandError as error:
        stderr = (error.stderr or "").strip().removeprefix("stderr:").strip(" '\n")
        raise GitError(f"{what}: git {error.command[1] if len(error.command) > 1 else ''} failed: {stderr}") from None
    except (git.BadName, git.BadObject, ValueError) as error:
        raise GitError(f"{what}: {error}") from None
    except git.GitError as error:
        raise GitError(f"{what}: {error}") from None


def open_repo(cwd: Path):  # -> git.Repo
    """The repository containing ``cwd``."""
    import git

    try:
        return git.Repo(cwd, search_parent_directories=True)
    except (git.InvalidGitRepositoryError, git.NoSuchPathError):
        raise GitError(
            f"{cwd}: not inside a git repository; REV:PATH specs and the gate need one."
        ) from None


def repo_root(cwd: Path) -> Path:
    return Path(open_repo(cwd).working_tree_dir or cwd)


def resolve(rev: str, cwd: Path) -> str:
    """Full commit id of ``rev``."""
    repo = open_repo(cwd)
    try:
        return repo.commit(rev).hexsha
    except Exception:  # gitpython raises several unrelated types for a bad name
        raise GitError(f"unknown git revision {rev!r} in {repo.working_tree_dir}.") from None


def _tree_path(repo, path: str, cwd: Path) -> str:
    # Paths are taken relative to the current folder when it lies inside the work tree,
    # like the files a user names on the command line; "./" and "../" work as usual.
    root = Path(repo.working_tree_dir).resolve()
    absolute = (cwd / path).resolve()
    try:
        return absolute.relative_to(root).as_posix()
    except ValueError:
        raise GitError(f"{path}: lies outside the repository {root}.") from None


def _blob(repo, rev: str, path: str, cwd: Path):
    """The blob of ``path`` at ``rev``, ``None`` when absent; a folder is an error."""
    commit = resolve(rev, cwd)
    tree_path = _tree_path(repo, path, cwd)
    try:
        blob = repo.commit(commit).tree / tree_path
    except KeyError:
        return None
    if blob.type != "blob":
        raise GitError(f"{path}: is a folder at git revision {rev!r}, not a model file.")
    return blob


def read_blob(rev: str, path: str, cwd: Path) -> bytes:
    """The bytes of ``path`` at revision ``rev``."""
    blob = _blob(open_repo(cwd), rev, path, cwd)
    if blob is None:
        raise GitError(f"{path}: does not exist at git revision {rev!r}.")
    return blob.data_stream.read()


def start_blob(rev: str, path: str, cwd: Path) -> Callable[[], bytes] | None:
    """Start reading ``path`` at ``rev``; ``None`` when absent there.

    One ``git cat-file`` process inflates the blob into a temporary file while this
    process does other work (a pipe would stall whenever Python holds the GIL); the
    returned function waits for it and gives the bytes. Errors are those of
    :func:`blob_id` and :func:`read_blob`.
    """
    import git

    repo = open_repo(cwd)
    entry = _blob(repo, rev, path, cwd)
    if entry is None:
        return None
    command = [git.Git.GIT_PYTHON_GIT_EXECUTABLE or "git", f"--git-dir={repo.git_dir}", "cat-file", "blob", entry.hexsha]
    try:
        handle = tempfile.TemporaryFile()
        process = subprocess.Popen(command, stdin=subprocess.DEVNULL, stdout=handle, stderr=subprocess.PIPE)
    except OSError:  # no temporary file or process to spare: read it now, as read_blob does
        data = entry.data_stream.read()
        return lambda: data

    def wait() -> bytes:
        with handle:
            _, error = process.communicate()
            if process.returncode != 0:
                raise GitError(f"{path}: git cat-file failed at git revision {rev!r}: "
                               f"{error.decode('utf-8', 'replace').strip()}")
            handle.seek(0)
            return handle.read()

    return wait


def blob_id(rev: str, path: str, cwd: Path) -> str | None:
    """Object id of ``path`` at ``rev``, or ``None`` when absent."""
    repo = open_repo(cwd)
    try:
        return (repo.commit(resolve(rev, cwd)).tree / _tree_path(repo, path, cwd)).hexsha
    except KeyError:
        return None


def merge_base(a: str, b: str, cwd: Path) -> str:
    repo = open_repo(cwd)
    with _converted(f"merge-base of {a} and {b}"):
        bases = repo.merge_base(resolve(a, cwd), resolve(b, cwd))
    if not bases:
        raise GitError(f"{a} and {b} have no common ancestor.")
    return bases[0].hexsha


def head_commit(cwd: Path) -> str | None:
    repo = open_repo(cwd)
    try:
        return repo.head.commit.hexsha
    except ValueError:
        return None


def is_dirty(cwd: Path, path: Path | None = None) -> bool:
    repo = open_repo(cwd)
    with _converted("git status"):
        if path is None:
            return repo.is_dirty(untracked_files=True)
        rel = _tree_path(repo, str(path), cwd)
        return repo.is_dirty(path=rel) or rel in repo.untracked_files


def find_root(path: Path) -> Path | None:
    """Work-tree root of the repository around ``path``, or ``None`` (never an error).

    For evidence and the review ledger a model outside any repository is normal, so
    this answers quietly where :func:`open_repo` would raise.
    """
    import git

    folder = path if path.is_dir() else path.parent
    try:
        repo = git.Repo(folder, search_parent_directories=True)
    except (git.InvalidGitRepositoryError, git.NoSuchPathError):
        return None
    return Path(repo.working_tree_dir).resolve() if repo.working_tree_dir else None


def worktree_state(path: Path) -> dict | None:
    """Where a model file stands in its repository, for an audit's evidence block.

    ``{"commit": HEAD id or None, "path": path in the repository, "dirty": the work
    tree has any change (untracked files included), "modified": this file differs
    from HEAD or is untracked}``; ``None`` outside a repository.
    """
    root = find_root(path.resolve())
    if root is None:
        return None
    absolute = path.resolve()
    return {
        "commit": head_commit(root),
        "path": absolute.relative_to(root).as_posix(),
        "dirty": is_dirty(root),
        "modified": is_dirty(root, absolute),
    }


def user_name(cwd: Path) -> str | None:
    """``user.name`` from git configuration as seen from ``cwd``; ``None`` if unset."""
    import git

    folder = cwd if cwd.is_dir() else cwd.parent
    try:
        value = git.Git(str(folder)).config("--get", "user.name")
    except Exception:  # unset or no git at all: only means "no name known"
        return None
    return value.strip() or None


def default_branch(cwd: Path) -> str | None:
    """The branch changes go into: ``origin/HEAD``'s target, else ``main``, else ``master``."""
    repo = open_repo(cwd)
    try:
        target = repo.git.rev_parse("--abbrev-ref", "origin/HEAD").strip()
    except Exception:  # no remote, or origin/HEAD not set: fall through to local names
        target = ""
    candidates = [target] if target and target != "origin/HEAD" else []
    for name in [*candidates, "main", "master"]:
        try:
            repo.commit(name)
            return name
        except Exception:  # gitpython raises several unrelated types for a bad name
            continue
    return None


def repo_relative(path: str, cwd: Path) -> str:
    """``path`` (relative to ``cwd``) as a path from the repository root, POSIX style."""
    return _tree_path(open_repo(cwd), path, cwd)


# --- reading a history through one repository object (history command) -------------
# These take the repository object from :func:`open_repo`, so a whole walk shares one
# gitpython object database (a persistent ``git cat-file`` reader), and listing the
# history costs a fixed number of git processes however many revisions it has.


def repo_path(repo, path: str, cwd: Path) -> str:
    """``path`` (relative to ``cwd``) as a path inside the repository's tree."""
    return _tree_path(repo, path, cwd)


def commit_id(repo, rev: str) -> str:
    """Full commit id of ``rev`` in ``repo``; an unknown name is a :class:`GitError`."""
    try:
        return repo.commit(rev).hexsha
    except Exception:  # gitpython raises several unrelated types for a bad name
        raise GitError(f"unknown git revision {rev!r} in {repo.working_tree_dir}.") from None


def commit_graph(repo, tips: list[str]) -> list[tuple[str, tuple[str, ...]]]:
    """Every commit reachable from ``tips`` with its parents, oldest first.

    Topological order (parents before children), so it holds even when commit dates
    tie or go backwards. One ``git rev-list`` process.
    """
    if not tips:
        return []
    with _converted("listing the commits"):
        out = repo.git.rev_list("--topo-order", "--reverse", "--parents", *tips, "--")
    graph = []
    for line in out.splitlines():
        sha, *parents = line.split()
        graph.append((sha, tuple(parents)))
    return graph


def path_commits(repo, tips: list[str], path: str, *, follow: bool = False) -> dict[str, str]:
    """Commits reachable from ``tips`` that change ``path``, each with the name the file
    has in that commit (with ``follow``, older names across renames). One ``git log``."""
    if not tips:
        return {}
    args = ["-z", "--format=%H", "--name-only", *(["--follow"] if follow else []), *tips, "--", path]
    with _converted(f"history of {path}"):
        out = repo.git.log(*args)
    found: dict[str, str] = {}
    current = None
    for token in out.split("\0"):
        if token.startswith("\n"):  # a file name follows its commit line after a newline
            if current is not None and current not in found:
                found[current] = token[1:]
        elif token.strip():
            current = token.strip()
    return found


def tags_by_commit(repo) -> dict[str, list[str]]:
    """Tag names per commit id (annotated tags peeled), names sorted."""
    tags: dict[str, list[str]] = {}
    with _converted("listing the tags"):
        for ref in repo.tags:
            try:
                sha = ref.commit.hexsha
            except ValueError:  # a tag of a tree or blob names no revision
                continue
            tags.setdefault(sha, []).append(ref.name)
    return {sha: sorted(names) for sha, names in tags.items()}


def blob_at(repo, commit: str, path: str) -> str | None:
    """Object id of the file ``path`` in ``commit``; ``None`` when absent or a folder."""
    with _converted(f"{commit[:12]}:{path}"):
        tree = repo.commit(commit).tree
        try:
            entry = tree / path
        except KeyError:
            return None
    return entry.hexsha if entry.type == "blob" else None


def read_object(repo, object_id: str) -> bytes:
    """The content of one blob, read through the repository's object database."""
    with _converted(f"reading object {object_id[:12]}"):
        return repo.odb.stream(bytes.fromhex(object_id)).read()


# --- writing, used only by the demo and tests to build repositories -----------------


def init_repo(path: Path, branch: str = "main"):
    import git

    with _converted(f"git init {path}"):
        repo = git.Repo.init(path, initial_branch=branch)
        with repo.config_writer() as config:
            config.set_value("user", "name", "tracecheck demo")
            config.set_value("user", "email", "demo@tracecheck.invalid")
            config.set_value("commit", "gpgsign", "false")
    return repo


def commit_all(repo, message: str, date: str | None = None) -> str:
    env = {"GIT_AUTHOR_DATE": date, "GIT_COMMITTER_DATE": date} if date else {}
    with _converted("git commit"):
        repo.git.add(A=True)
        with repo.git.custom_environment(**env):
            repo.git.commit(m=message, allow_empty=True)
    return repo.head.commit.hexsha


def tag(repo, name: str) -> None:
    with _converted(f"git tag {name}"):
        repo.create_tag(name)


def create_branch(repo, name: str, start: str = "HEAD") -> None:
    with _converted(f"git branch {name}"):
        repo.git.branch(name, start)


def checkout(repo, name: str) -> None:
    with _converted(f"git checkout {name}"):
        repo.git.checkout(name)
