"""Runs every riskbound command shown in README.md and docs/*.md against a real
riskbound-server and checks its exit code and, where the docs show it, its
output. It also checks that every relative link of those files resolves and
that none of them cites a private note ("formula sheet", "bounds.md",
"check_formulas"). The same citation check covers every file under tests/
(including the soundness REPORT.md) and examples/, except the two files that
implement it (this one and tests/core/texts_test.cc); `--citations-only` runs
just that check, without a server (the ctest `private_citations`).

The convention (also in DEVELOPERS.md, "Commands in the docs"):

* Only fenced blocks whose info string is exactly `sh` or `console` are read.
  Any other fence (`text`, `json`, `python`, `sh-skip`, none) is never run:
  use `text` for synopses with placeholders and for output shown alone.
* In a `sh` block, every line that starts with `riskbound ` is a command
  (a line ending in `\\` continues on the next). Every other line (comments,
  `./scripts/demo`, `cmake`, `podman`, `kubectl`, `curl`, `case $? in ...`)
  is not run, and is counted as skipped.
* In a `console` block, a line starting with `$ riskbound ` is a command, and
  the lines after it, up to the next `$ ` line or the end of the block, are
  its expected output: stdout followed by stderr. An empty expectation is not
  checked. A `$ ` line that is not a riskbound call is skipped with its output.
* A command ends in `# exit N` when N is its documented exit code; without
  it the exit code must be 0. Any other trailing `# comment` is a comment.
* Output comparison: trailing whitespace of every line and trailing empty
  lines are ignored. A line that is exactly `...` stands for any number of
  lines (zero included); `...` inside a line stands for any text on that line
  (digests, timestamps, long notes). Without a final `...` line, the output
  must end where the shown output ends.
* The address 127.0.0.1:50051 (the server's default) stands for the test's
  server wherever it appears in a command or a python block, and is replaced
  by it. A command that names another `--server` keeps it (the docs use that
  to show exit code 4).
* A `python` block that contains 127.0.0.1:50051 is a complete client and is
  run as a whole with /usr/bin/python3, with --stubs (the generated
  riskbound.v1 Python stubs) on PYTHONPATH; it must exit 0. Other python
  blocks are fragments and are not run.
* Each command runs through bash from the repository root, with `riskbound`
  on PATH being the built CLI and RISKBOUND_SERVER set to a riskbound-server
  started for this test on 127.0.0.1:0.

Usage: doc_commands_test.py --server BIN --cli BIN --source REPO_DIR
       [--stubs PYGEN_DIR] [--only FILE.md ...] [--verbose]
       doc_commands_test.py --citations-only --source REPO_DIR
Exit code 0 when every command and link checks out; the report lists every
block that ran.
"""
import argparse
import os
import re
import subprocess
import sys
import tempfile

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "integration"))
import server_harness  # noqa: E402

FENCE = re.compile(r"^(\s*)(```+|~~~+)\s*([^\s`]*)\s*$")
EXIT = re.compile(r"\s+#\s*exit\s+(\d+)\s*$")
LINK = re.compile(r"\[[^\]]*\]\(([^)\s]+)(?:\s+\"[^\"]*\")?\)")
COMMAND_TIMEOUT = 120


class Command:
    def __init__(self, doc, line, text, expected_code, expected_output):
        self.doc, self.line = doc, line
        self.text = text
        self.expected_code = expected_code
        self.expected_output = expected_output  # list of lines, or None


def doc_files(source, only):
    if only:
        return [os.path.join(source, f) for f in only]
    files = [os.path.join(source, "README.md")]
    docs = os.path.join(source, "docs")
    files += sorted(os.path.join(docs, f) for f in os.listdir(docs) if f.endswith(".md"))
    return files


def blocks(path):
    """Yields (info, first line number, lines) of each fenced block."""
    with open(path, encoding="utf-8") as f:
        lines = f.read().split("\n")
    i = 0
    while i < len(lines):
        m = FENCE.match(lines[i])
        if not m:
            i += 1
            continue
        indent, fence, info = m.group(1), m.group(2), m.group(3)
        start = i + 1
        j = start
        while j < len(lines) and not (lines[j].strip().startswith(fence[0] * len(fence))
                                      and lines[j].strip().strip(fence[0]) == ""):
            j += 1
        body = [l[len(indent):] if l.startswith(indent) else l.lstrip() for l in lines[start:j]]
        yield info, start + 1, body
        i = j + 1


def split_exit(command):
    """Returns (the command without its trailing comment, expected exit code)."""
    code = 0
    m = EXIT.search(command)
    if m:
        code = int(m.group(1))
        command = command[:m.start()]
    # Cut at the first '#' that starts a word outside quotes, as bash would.
    quote = None
    for k, ch in enumerate(command):
        if quote:
            if ch == quote:
                quote = None
        elif ch in "'\"":
            quote = ch
        elif ch == "#" and (k == 0 or command[k - 1].isspace()):
            return command[:k].strip(), code
    return command.strip(), code


def join_continuations(body, first_line):
    """Yields (line number, logical line) joining lines that end in '\\'."""
    k = 0
    while k < len(body):
        line, number = body[k], first_line + k
        while line.rstrip().endswith("\\") and k + 1 < len(body):
            k += 1
            line = line.rstrip()[:-1] + " " + body[k].strip()
        yield number, line
        k += 1


def parse(path, rel):
    """Returns (commands, skipped lines, blocks read, python blocks) of one
    document; a python block is (line number, source)."""
    commands, skipped, read, python = [], [], 0, []
    for info, first, body in blocks(path):
        if info == "python":
            if "127.0.0.1:50051" in "\n".join(body):
                python.append((first, "\n".join(body)))
            else:
                skipped.append((rel, first, "python fragment (no 127.0.0.1:50051 in it)"))
        elif info == "sh":
            read += 1
            for number, line in join_continuations(body, first):
                stripped = line.strip()
                if stripped.startswith("riskbound "):
                    text, code = split_exit(stripped)
                    commands.append(Command(rel, number, text, code, None))
                elif stripped and not stripped.startswith("#"):
                    skipped.append((rel, number, stripped))
        elif info == "console":
            read += 1
            current = None
            for number, line in join_continuations(body, first):
                if line.startswith("$ "):
                    stripped = line[2:].strip()
                    if stripped.startswith("riskbound "):
                        text, code = split_exit(stripped)
                        current = Command(rel, number, text, code, [])
                        commands.append(current)
                    else:
                        skipped.append((rel, number, stripped))
                        current = None
                elif current is not None:
                    current.expected_output.append(line)
    return commands, skipped, read, python


def normalize(text):
    lines = [l.rstrip() for l in text.split("\n")]
    while lines and not lines[-1]:
        lines.pop()
    return lines


def line_matches(pattern, actual):
    if "..." not in pattern:
        return pattern == actual
    parts = [re.escape(p) for p in pattern.split("...")]
    return re.fullmatch(".*".join(parts), actual, flags=re.S) is not None


def output_matches(expected, actual):
    """Glob match of lines: a line '...' matches any run of lines."""
    memo = {}

    def m(i, j):
        key = (i, j)
        if key in memo:
            return memo[key]
        if i == len(expected):
            r = j == len(actual)
        elif expected[i].strip() == "...":
            r = any(m(i + 1, k) for k in range(j, len(actual) + 1))
        else:
            r = j < len(actual) and line_matches(expected[i], actual[j]) and m(i + 1, j + 1)
        memo[key] = r
        return r

    sys.setrecursionlimit(max(10000, 4 * (len(expected) + len(actual))))
    return m(0, 0)


def first_difference(expected, actual):
    for k in range(max(len(expected), len(actual))):
        e = expected[k] if k < len(expected) else None
        a = actual[k] if k < len(actual) else None
        if e is not None and e.strip() == "...":
            return f"line {k + 1} (after a '...' line the rest did not match)"
        if e is None or a is None or not line_matches(e, a):
            return f"line {k + 1}:\n      docs: {e if e is not None else '<end>'}\n      got:  {a if a is not None else '<end>'}"
    return "?"


def anchors(path):
    """GitHub-style anchors of a Markdown file's headings."""
    out = set()
    with open(path, encoding="utf-8") as f:
        text = re.sub(r"```.*?```", "", f.read(), flags=re.S)
    for m in re.finditer(r"^#+\s+(.*)$", text, flags=re.M):
        slug = re.sub(r"[^\w\- ]", "", m.group(1).strip().lower()).replace(" ", "-")
        out.add(slug)
    return out


# Users do not have the project's private notes: the docs, tests and examples
# cite published sources (authors, year, theorem) or say how a value was
# computed, never a "formula sheet" (also "FormulaSheet", "formula-sheet",
# "sheet row 4.6", "sheet 11.3", "the sheet's"), "bounds.md" or its script
# "check_formulas".
PRIVATE_CITATION = re.compile(r"bounds\.md|formula[\s_-]*sheet|check_formulas"
                              r"|\bsheet(?:'s)?\s+(?:rows?\b|sections?\b|\d)|\bthe sheet's\b", re.I)

# Trees scanned for private citations besides the docs (relative to --source),
# and the files exempt because they implement the check and must name it.
CITATION_TREES = ["tests", "examples"]
CITATION_CHECKERS = {os.path.join("tests", "docs", "doc_commands_test.py"),
                     os.path.join("tests", "core", "texts_test.cc")}
CITATION_SKIP_DIRS = {".git", "__pycache__", "node_modules", "build"}


def private_citations(path, rel):
    """Every line of one file that cites a private note, as a problem."""
    with open(path, "rb") as f:
        text = f.read().decode("utf-8", errors="replace")
    problems = []
    for number, line in enumerate(text.split("\n"), 1):
        m = PRIVATE_CITATION.search(line)
        if m:
            problems.append(f"{rel}:{number}: cites a private note users do not have "
                            f"({m.group(0)}): cite the published source")
    return problems


def check_trees(source):
    """Private citations in tests/ (REPORT.md included) and examples/; returns
    (files scanned, problems)."""
    scanned, problems = 0, []
    for tree in CITATION_TREES:
        for root, dirs, files in os.walk(os.path.join(source, tree)):
            dirs[:] = sorted(d for d in dirs if d not in CITATION_SKIP_DIRS)
            for name in sorted(files):
                path = os.path.join(root, name)
                rel = os.path.relpath(path, source)
                if rel in CITATION_CHECKERS:
                    continue
                scanned += 1
                problems += private_citations(path, rel)
    return scanned, problems


def check_links(path, rel, source):
    problems = []
    with open(path, encoding="utf-8") as f:
        text = f.read()
    problems += private_citations(path, rel)
    # Links inside fenced blocks are not links.
    text = re.sub(r"```.*?```", "", text, flags=re.S)
    for target in LINK.findall(text):
        if re.match(r"^[a-z]+:", target) or target.startswith("#"):
            continue
        file_part = target.split("#", 1)[0]
        resolved = os.path.normpath(os.path.join(os.path.dirname(path), file_part))
        if not os.path.exists(resolved):
            problems.append(f"{rel}: link to {target}: {os.path.relpath(resolved, source)} does not exist")
        elif "#" in target and resolved.endswith(".md"):
            anchor = target.split("#", 1)[1]
            if anchor not in anchors(resolved):
                problems.append(f"{rel}: link to {target}: no heading with anchor #{anchor}")
    return problems


def self_check():
    """The comparison rules above, checked on known cases before they are
    trusted with the docs (a matcher that accepts everything would pass)."""
    assert output_matches(["a", "..."], ["a", "b", "c"])
    assert output_matches(["a", "...", "c"], ["a", "c"])
    assert not output_matches(["a"], ["a", "b"])
    assert not output_matches(["a", "b"], ["a"])
    assert output_matches(["sha ... end"], ["sha 0f3a end"])
    assert not output_matches(["sha ... end"], ["sha 0f3a stop"])
    assert not output_matches(["x"], ["y"])
    assert split_exit('riskbound a --b "c # d"   # exit 3') == ('riskbound a --b "c # d"', 3)
    assert split_exit("riskbound a --b 1   # a note") == ("riskbound a --b 1", 0)
    assert normalize("a  \nb\n\n") == ["a", "b"]
    for cited in ("Source: formula sheet row 4.6", "Formula Sheet 11.3", "bounds.md row 10.1",
                  "(check_formulas.py, 5000 trials)", "TEST(X, FormulaSheetRows)",
                  "formula-sheet values", "(union bound, sheet 11.3)", "the sheet's 7.3 bound",
                  "sheet row 9.5"):
        assert PRIVATE_CITATION.search(cited), cited
    for clean in ("Source: Clopper & Pearson (1934)", "a spreadsheet of bounds", "spreadsheet 2",
                  "scipy.stats.binom.cdf", "check_links", "bounds_md_free"):
        assert not PRIVATE_CITATION.search(clean), clean


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--server", help="the riskbound-server binary")
    parser.add_argument("--cli", help="the riskbound binary")
    parser.add_argument("--source", required=True, help="the repository root")
    parser.add_argument("--stubs", help="generated riskbound.v1 Python stubs (runs python blocks)")
    parser.add_argument("--only", nargs="*", help="documents to check, relative to --source")
    parser.add_argument("--verbose", action="store_true", help="print every command's output")
    parser.add_argument("--citations-only", action="store_true",
                        help="only check the docs, tests/ and examples/ for private citations")
    args = parser.parse_args()
    self_check()
    source = os.path.abspath(args.source)

    scanned, citation_failures = check_trees(source)
    print(f"tests/, examples/: {scanned} files scanned for private citations, "
          f"{len(citation_failures)} found")
    if args.citations_only:
        for path in doc_files(source, args.only):
            citation_failures += private_citations(path, os.path.relpath(path, source))
        for f in citation_failures:
            print(f"FAIL {f}")
        print("OK" if not citation_failures else f"{len(citation_failures)} private citation(s)")
        return 0 if not citation_failures else 1
    if not args.server or not args.cli:
        parser.error("--server and --cli are required unless --citations-only")

    bindir = tempfile.mkdtemp(prefix="riskbound-docs-")
    os.symlink(os.path.abspath(args.cli), os.path.join(bindir, "riskbound"))

    all_commands, all_skipped, all_python, failures = [], [], [], list(citation_failures)
    for path in doc_files(source, args.only):
        rel = os.path.relpath(path, source)
        commands, skipped, read, python = parse(path, rel)
        all_commands += commands
        all_python += [(rel, line, code) for line, code in python]
        all_skipped += skipped
        failures += check_links(path, rel, source)
        print(f"{rel}: {read} sh/console blocks, {len(commands)} riskbound commands, "
              f"{len(python)} python clients, {len(skipped)} other lines not run")

    server = server_harness.ServerProcess(os.path.abspath(args.server), log_level="info")
    env = dict(os.environ)
    env["PATH"] = bindir + os.pathsep + env.get("PATH", "")
    env["RISKBOUND_SERVER"] = server.address
    ran = 0
    try:
        for c in all_commands:
            where = f"{c.doc}:{c.line}"
            try:
                p = subprocess.run(["bash", "-c", c.text.replace("127.0.0.1:50051", server.address)],
                                   cwd=source, env=env, capture_output=True,
                                   text=True, timeout=COMMAND_TIMEOUT)
            except subprocess.TimeoutExpired:
                failures.append(f"{where}: `{c.text}` did not finish within {COMMAND_TIMEOUT} s")
                continue
            ran += 1
            problems = []
            if p.returncode != c.expected_code:
                problems.append(f"exit code {p.returncode}, the docs say {c.expected_code}")
            checked = c.expected_output is not None and normalize("\n".join(c.expected_output))
            if checked:
                expected = normalize("\n".join(c.expected_output))
                actual = normalize(p.stdout + p.stderr)
                if not output_matches(expected, actual):
                    problems.append("output differs from the docs, first difference at "
                                    + first_difference(expected, actual))
            status = "FAIL" if problems else "ok"
            print(f"  {status:4} {where}: {c.text}  (exit {p.returncode}"
                  f"{', output compared' if checked else ''})")
            if problems or args.verbose:
                for pr in problems:
                    print(f"       {pr}")
                print("       --- stdout+stderr ---")
                for l in normalize(p.stdout + p.stderr):
                    print(f"       | {l}")
            if problems:
                failures.append(f"{where}: `{c.text}`: " + "; ".join(problems))
        for doc, line, code in all_python:
            where = f"{doc}:{line}"
            if not args.stubs:
                all_skipped.append((doc, line, "python block (no --stubs given)"))
                continue
            penv = dict(os.environ)
            penv["PYTHONPATH"] = os.path.abspath(args.stubs)
            try:
                p = subprocess.run(["/usr/bin/python3", "-c", code.replace("127.0.0.1:50051", server.address)],
                                   cwd=source, env=penv, capture_output=True, text=True,
                                   timeout=COMMAND_TIMEOUT)
            except subprocess.TimeoutExpired:
                failures.append(f"{where}: python block did not finish within {COMMAND_TIMEOUT} s")
                continue
            ran += 1
            status = "ok" if p.returncode == 0 else "FAIL"
            print(f"  {status:4} {where}: python block (exit {p.returncode})")
            if p.returncode != 0 or args.verbose:
                for l in normalize(p.stdout + p.stderr):
                    print(f"       | {l}")
            if p.returncode != 0:
                failures.append(f"{where}: python block exited {p.returncode}")
    finally:
        code = server.stop()
        if code not in (0, None):
            failures.append(f"riskbound-server exited {code}: {server.logs()[-2000:]}")

    print(f"\n{ran} riskbound commands and python blocks ran; {len(all_skipped)} lines in sh/console blocks "
          f"were not riskbound calls and were not run:")
    for doc, line, text in all_skipped:
        print(f"  skip {doc}:{line}: {text}")
    if not all_commands and not args.only:
        failures.append("no riskbound command found in the docs")
    if failures:
        print(f"\n{len(failures)} problem(s):")
        for f in failures:
            print(f"  - {f}")
        return 1
    print("\nevery documented command and link checks out")
    return 0


if __name__ == "__main__":
    sys.exit(main())
