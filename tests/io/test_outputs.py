"""Outputs that are not plain files, and gzip-compressed outputs.

A regular file is written through a temporary file renamed into place; a
symbolic link is followed to the file it names and the link stays; a device,
FIFO, pipe or socket is written to directly and stays what it was (POSIX.1-2017,
"Pathname Resolution" and the open(2) and rename(2) pages: rename replaces the
name it is given, so renaming over a link or a device node would replace it).
Each check compares the bytes that arrive with the bytes of a normal run to a
regular file, and the node's type (os.lstat) before and after.

A name ending in .gz is written in the gzip format (Deutsch 1996, RFC 1952),
checked with Python's own gzip reader and DendroPy.
"""

import contextlib
import errno
import gzip
import os
import socket
import stat
import subprocess
import sys
import tempfile
import threading
from pathlib import Path

import pytest
from click.testing import CliRunner

from cladewright import read_trees
from cladewright.cli import main
from cladewright.cli.app import check_output_not_input
from cladewright.errors import InputError
from cladewright.io.output import atomic_output, write_text_atomic
from cladewright.io.readers import read_distance_matrix

EXAMPLE = Path(__file__).resolve().parents[2] / "example_alignments" / "glass_snails_coi.fasta"
TEXT = "(a:0.1,b:0.2,(c:0.3,d:0.4):0.05);\n"


def _run(args):
    return CliRunner().invoke(main, ["-q"] + [str(a) for a in args])


def _assert_one_line_error(result, fragment):
    # source: the project's CLI contract (docs/errors.md): exit status 2, one line "cladewright: error: ..."
    assert result.exit_code == 2, result.output
    lines = result.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("cladewright: error:"), result.stderr
    assert fragment in lines[0] and "Traceback" not in result.output


@pytest.fixture(scope="module")
def plain(tmp_path_factory):
    """The bytes of a normal run of each command to a regular file: what every other target must receive."""
    folder = tmp_path_factory.mktemp("plain")
    out = {}
    for command, name in (("distances", "m.tsv"), ("tree", "t.nwk")):
        result = _run([command, EXAMPLE, "-o", folder / name])
        assert result.exit_code == 0, result.output
        out[command] = (folder / name).read_bytes()
    return out


@contextlib.contextmanager
def _fifo_reader(path):
    """Read the FIFO ``path`` to its end in a thread; the bytes are in box["data"] after the block."""
    box = {}

    def read():
        with open(path, "rb") as fh:
            box["data"] = fh.read()

    thread = threading.Thread(target=read, daemon=True)
    thread.start()
    try:
        yield box
    finally:
        thread.join(timeout=20)
        if thread.is_alive():  # the writer never opened the FIFO: release the reader so the test can fail
            with contextlib.suppress(OSError):
                os.close(os.open(path, os.O_WRONLY | os.O_NONBLOCK))
            thread.join(timeout=20)


def _mknod_char(path, major, minor):
    """A character device node inside the test's own folder (never the real /dev)."""
    try:
        os.mknod(path, 0o666 | stat.S_IFCHR, os.makedev(major, minor))
    except PermissionError:
        pytest.skip("os.mknod raised PermissionError: making a device node needs root (CAP_MKNOD)")
    return os.lstat(path)


def _same_node(path, before):
    after = os.lstat(path)
    return (stat.S_IFMT(after.st_mode), after.st_ino, after.st_rdev) == \
        (stat.S_IFMT(before.st_mode), before.st_ino, before.st_rdev)


# ---- FIFOs, pipes, sockets ------------------------------------------------------------------------

def test_fifo_is_written_directly_by_the_library(tmp_path):
    # source: POSIX mkfifo/open: a writer opening a FIFO meets the reader waiting on it; the FIFO stays
    fifo = tmp_path / "out.nwk"
    os.mkfifo(fifo)
    before = os.lstat(fifo)
    with _fifo_reader(fifo) as box:
        write_text_atomic(fifo, TEXT)
    assert box["data"] == TEXT.encode()
    assert stat.S_ISFIFO(os.lstat(fifo).st_mode) and _same_node(fifo, before)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.nwk"]  # no temporary file left


@pytest.mark.parametrize("command", ["distances", "tree"])
def test_fifo_is_written_directly_by_the_cli(tmp_path, plain, command):
    # source: the bytes of a normal run to a regular file; POSIX FIFO semantics as above
    fifo = tmp_path / "out"
    os.mkfifo(fifo)
    before = os.lstat(fifo)
    with _fifo_reader(fifo) as box:
        result = _run([command, EXAMPLE, "-o", fifo])
    assert result.exit_code == 0, result.output
    assert box["data"] == plain[command]
    assert _same_node(fifo, before) and [p.name for p in tmp_path.iterdir()] == ["out"]


def test_dev_fd_pipe_is_written_through_the_open_descriptor(tmp_path, plain):
    # source: /dev/fd/N names the process's open descriptor N (POSIX.1-2017 leaves /dev/fd to the system;
    # Linux proc(5), /proc/self/fd); a shell's >(command) hands a program such a name for a pipe
    for how in ("library", "cli"):
        r, w = os.pipe()
        box = {}
        reader = threading.Thread(target=lambda: box.update(data=os.fdopen(r, "rb").read()), daemon=True)
        reader.start()
        try:
            if how == "library":
                write_text_atomic(f"/dev/fd/{w}", TEXT)
            else:
                result = _run(["distances", EXAMPLE, "-o", f"/dev/fd/{w}"])
                assert result.exit_code == 0, result.output
            assert stat.S_ISFIFO(os.fstat(w).st_mode)  # still the caller's open pipe
        finally:
            os.close(w)
        reader.join(timeout=20)
        assert box["data"] == (TEXT.encode() if how == "library" else plain["distances"])


def test_pipe_closed_by_its_reader_is_a_one_line_error(tmp_path):
    # source: POSIX write(2): writing to a pipe with no reader fails with EPIPE (Python ignores SIGPIPE)
    r, w = os.pipe()
    os.close(r)
    try:
        with pytest.raises(InputError) as info:
            write_text_atomic(f"/dev/fd/{w}", TEXT * 10000)
    finally:
        os.close(w)
    message = str(info.value)
    assert "\n" not in message and message.startswith(f"/dev/fd/{w}: cannot write to the output")
    assert os.strerror(errno.EPIPE) in message


def test_socket_is_written_directly(tmp_path):
    # source: POSIX connect(2) on a Unix-domain stream socket; the socket file stays a socket
    path = tmp_path / "s"
    box = {}
    with socket.socket(socket.AF_UNIX, socket.SOCK_STREAM) as server:
        server.bind(str(path))
        server.listen(1)

        def serve():
            conn, _ = server.accept()
            with conn:
                chunks = []
                while chunk := conn.recv(65536):
                    chunks.append(chunk)
            box["data"] = b"".join(chunks)

        thread = threading.Thread(target=serve, daemon=True)
        thread.start()
        write_text_atomic(path, TEXT)
        thread.join(timeout=20)
    assert box["data"] == TEXT.encode() and stat.S_ISSOCK(os.lstat(path).st_mode)


def test_dev_stdout_appended_not_replaced(tmp_path, plain):
    # source: POSIX shell redirection '>>' opens standard output for appending; writing through the open
    # descriptor keeps what was there (a rename over the file would not)
    out = tmp_path / "log.tsv"
    out.write_bytes(b"earlier line\n")
    with open(out, "ab") as fh:
        done = subprocess.run([sys.executable, "-m", "cladewright.cli", "-q", "distances", str(EXAMPLE),
                               "-o", "/dev/stdout"], stdout=fh, stderr=subprocess.PIPE, timeout=300)
    assert done.returncode == 0, done.stderr
    assert out.read_bytes() == b"earlier line\n" + plain["distances"]


# ---- device nodes (made with mknod inside tmp_path) -----------------------------------------------

def test_null_device_node_is_written_not_replaced(tmp_path):
    # source: Linux devices.txt: character device 1,3 is the null device (accepts and discards writes)
    node = tmp_path / "null"
    before = _mknod_char(node, 1, 3)
    write_text_atomic(node, TEXT)
    with atomic_output(node, "wb") as fh:
        fh.write(b"\x00" * 100)
    result = _run(["tree", EXAMPLE, "-o", node, "--report", node])  # a char device may be named twice
    assert result.exit_code == 0, result.output
    assert _same_node(node, before) and os.lstat(node).st_rdev == os.makedev(1, 3)
    assert [p.name for p in tmp_path.iterdir()] == ["null"]


def test_full_device_node_gives_one_line_error_and_stays(tmp_path):
    # source: Linux devices.txt: character device 1,7 is the full device (every write fails with ENOSPC)
    node = tmp_path / "full"
    before = _mknod_char(node, 1, 7)
    with pytest.raises(InputError) as info:
        write_text_atomic(node, TEXT)
    assert os.strerror(errno.ENOSPC) in str(info.value) and "\n" not in str(info.value)
    result = _run(["distances", EXAMPLE, "-o", node])
    _assert_one_line_error(result, f"cannot write to the output, a character device ({os.strerror(errno.ENOSPC)})")
    assert _same_node(node, before) and [p.name for p in tmp_path.iterdir()] == ["full"]


# ---- symbolic links --------------------------------------------------------------------------------

def test_link_is_followed_and_kept(tmp_path):
    # source: POSIX pathname resolution follows a symbolic link to its target; the link itself is untouched
    target = tmp_path / "t.nwk"
    target.write_text("old\n")
    target.chmod(0o640)
    link = tmp_path / "link.nwk"
    link.symlink_to("t.nwk")
    write_text_atomic(link, TEXT)
    assert link.is_symlink() and os.readlink(link) == "t.nwk"
    assert target.read_text() == TEXT and stat.S_IMODE(target.stat().st_mode) == 0o640
    assert sorted(p.name for p in tmp_path.iterdir()) == ["link.nwk", "t.nwk"]


def test_dangling_link_creates_its_target(tmp_path):
    # source: POSIX open(2) with O_CREAT through a dangling link creates the file the link names
    link = tmp_path / "link.nwk"
    link.symlink_to(tmp_path / "made.nwk")
    write_text_atomic(link, TEXT)
    assert link.is_symlink() and (tmp_path / "made.nwk").read_text() == TEXT


def test_relative_link_to_another_folder_via_cli(tmp_path, plain, monkeypatch):
    # source: POSIX pathname resolution: a relative link is read from the link's own folder; the temporary
    # file lives beside the target, so the rename stays within one file system (rename(2), EXDEV)
    a, b = tmp_path / "a", tmp_path / "b"
    a.mkdir()
    b.mkdir()
    (a / "link.nwk").symlink_to(os.path.join("..", "b", "t.nwk"))
    (b / "t.nwk").write_text("old\n")
    folders = []
    real_mkstemp = tempfile.mkstemp

    def spy(**kw):
        folders.append(os.path.realpath(kw["dir"]))
        return real_mkstemp(**kw)

    monkeypatch.setattr(tempfile, "mkstemp", spy)
    result = _run(["tree", EXAMPLE, "-o", a / "link.nwk"])
    assert result.exit_code == 0, result.output
    assert (b / "t.nwk").read_bytes() == plain["tree"] and folders == [os.path.realpath(b)]
    assert os.readlink(a / "link.nwk") == os.path.join("..", "b", "t.nwk")
    assert [p.name for p in a.iterdir()] == ["link.nwk"] and [p.name for p in b.iterdir()] == ["t.nwk"]


def test_chain_of_links_and_a_loop(tmp_path, plain):
    # source: POSIX pathname resolution follows each link in turn; Linux stops after 40 (MAXSYMLINKS, ELOOP)
    (tmp_path / "sub").mkdir()
    (tmp_path / "l1").symlink_to("sub/l2")                     # relative, into a folder
    (tmp_path / "sub" / "l2").symlink_to(tmp_path / "l3")      # absolute
    (tmp_path / "l3").symlink_to("m.tsv")                      # relative, the real file
    result = _run(["distances", EXAMPLE, "-o", tmp_path / "l1"])
    assert result.exit_code == 0, result.output
    assert (tmp_path / "m.tsv").read_bytes() == plain["distances"]
    assert [os.readlink(p) for p in (tmp_path / "l1", tmp_path / "sub" / "l2", tmp_path / "l3")] == \
        ["sub/l2", str(tmp_path / "l3"), "m.tsv"]
    (tmp_path / "x").symlink_to("y")
    (tmp_path / "y").symlink_to("x")
    _assert_one_line_error(_run(["tree", EXAMPLE, "-o", tmp_path / "x"]), "chain of more than 40 symbolic links")
    assert os.readlink(tmp_path / "x") == "y" and os.readlink(tmp_path / "y") == "x"


# ---- write protection, outputs named twice ----------------------------------------------------------

def test_write_protected_file_is_refused(tmp_path):
    # source: POSIX file mode bits: no write bit (0444) means the file is not to be written; root passes
    # access(2) regardless, so the mode bits are the test that holds for every user
    out = tmp_path / "t.nwk"
    out.write_text("old\n")
    out.chmod(0o444)
    with pytest.raises(InputError, match="write-protected"):
        write_text_atomic(out, TEXT)
    _assert_one_line_error(_run(["tree", EXAMPLE, "-o", out]), "the output exists and is write-protected")
    link = tmp_path / "link.nwk"
    link.symlink_to("t.nwk")
    _assert_one_line_error(_run(["tree", EXAMPLE, "-o", link]), "write-protected")
    assert out.read_text() == "old\n" and stat.S_IMODE(out.stat().st_mode) == 0o444
    assert sorted(p.name for p in tmp_path.iterdir()) == ["link.nwk", "t.nwk"]


def test_output_named_as_input(tmp_path):
    # source: common practice: an output that is an input (by name, link or FIFO) would destroy it; a
    # character device such as the null device loses nothing when named twice
    aln = tmp_path / "a.fasta"
    aln.write_bytes(EXAMPLE.read_bytes())
    link = tmp_path / "link.fasta"
    link.symlink_to("a.fasta")
    fifo = tmp_path / "f"
    os.mkfifo(fifo)
    for output, inputs in ((aln, (aln,)), (link, (aln,)), (aln, (link,)), (fifo, (fifo,))):
        with pytest.raises(InputError, match="is also an input"):
            check_output_not_input(str(output), *map(str, inputs))
    _assert_one_line_error(_run(["tree", EXAMPLE, "-o", fifo, "--report", fifo]), "both name")
    node = tmp_path / "null"
    _mknod_char(node, 1, 3)
    check_output_not_input(str(node), str(node), str(aln))  # no error
    assert aln.read_bytes() == EXAMPLE.read_bytes()


# ---- gzip outputs ----------------------------------------------------------------------------------

def test_gz_outputs_are_gzip_and_reproducible(tmp_path, plain):
    # source: RFC 1952 section 2.3: ID1 0x1f, ID2 0x8b, CM 8 (deflate), FLG (0: no name), MTIME (4 bytes,
    # little-endian; 0: none); decoded by Python's gzip module, an implementation independent of the writer
    outs = {}
    for command, name in (("tree", "t.nwk.gz"), ("distances", "m.tsv.gz")):
        for run in (1, 2):
            path = tmp_path / f"{run}{name}"
            result = _run([command, EXAMPLE, "-o", path])
            assert result.exit_code == 0, result.output
            outs[command, run] = path.read_bytes()
        data = outs[command, 1]
        assert data[:4] == b"\x1f\x8b\x08\x00" and data[4:8] == b"\x00\x00\x00\x00"
        assert gzip.decompress(data) == plain[command]
        assert outs[command, 2] == data  # identical runs, identical bytes
    assert read_distance_matrix(tmp_path / "1m.tsv.gz").names == read_distance_matrix(
        _write(tmp_path / "m.tsv", plain["distances"])).names


def _write(path, data):
    path.write_bytes(data)
    return path


def test_gz_tree_reads_back_with_cladewright_and_dendropy(tmp_path, plain):
    # source: DendroPy's Newick reader (an independent implementation) on the gunzipped text; the taxa are
    # the FASTA headers of the example alignment, read here line by line
    import dendropy

    gz = tmp_path / "t.nwk.gz"
    assert _run(["tree", EXAMPLE, "-o", gz]).exit_code == 0
    plain_path = _write(tmp_path / "t.nwk", plain["tree"])
    ours = read_trees(gz)
    assert len(ours) == 1 and ours[0].to_newick() == read_trees(plain_path)[0].to_newick()
    headers = [line[1:].split()[0] for line in EXAMPLE.read_text().splitlines() if line.startswith(">")]
    with gzip.open(gz, "rt", encoding="utf-8") as fh:
        theirs = dendropy.Tree.get(file=fh, schema="newick", preserve_underscores=True)
    reference = dendropy.Tree.get(path=str(plain_path), schema="newick", preserve_underscores=True)
    assert sorted(t.label for t in theirs.taxon_namespace) == sorted(headers)
    assert theirs.as_string(schema="newick") == reference.as_string(schema="newick")
    nex = tmp_path / "t.nex.gz"  # the format still follows the name under the .gz
    assert _run(["tree", EXAMPLE, "-o", nex]).exit_code == 0
    assert gzip.decompress(nex.read_bytes()).startswith(b"#NEXUS")
    assert read_trees(nex)[0].to_newick() == ours[0].to_newick()


def test_gz_through_a_link_and_a_fifo(tmp_path):
    # source: RFC 1952 magic number; a link to a .gz file, and a FIFO named .gz, get gzip as the name says
    link = tmp_path / "latest.nwk"
    link.symlink_to("run.nwk.gz")
    write_text_atomic(link, TEXT)
    assert gzip.decompress((tmp_path / "run.nwk.gz").read_bytes()) == TEXT.encode()
    fifo = tmp_path / "pipe.nwk.gz"
    os.mkfifo(fifo)
    with _fifo_reader(fifo) as box:
        write_text_atomic(fifo, TEXT)
    assert box["data"][:2] == b"\x1f\x8b" and gzip.decompress(box["data"]) == TEXT.encode()


def test_gz_replicate_file_is_refused(tmp_path):
    # source: common practice: a replicate file is appended one line at a time and cut back to its last
    # whole line by --resume, which a compressed stream does not allow; refused before anything is written
    reps = tmp_path / "reps.nwk.gz"
    result = _run(["tree", EXAMPLE, "-o", tmp_path / "t.nwk", "--replicates", 2, "--seed", 1, "--workers", 1,
                   "--save-replicates", reps])
    _assert_one_line_error(result, "a replicate file is written uncompressed")
    assert list(tmp_path.iterdir()) == []
