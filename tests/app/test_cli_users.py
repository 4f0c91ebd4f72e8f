"""``bendline users ...`` through ``app.cli.main``, against a real Redis."""

from __future__ import annotations

import io
import sys

import pytest
import redis

from bendline.app import cli
from bendline.app.commands import users as users_command
from bendline.app.team.users import UserStore

from .redis_server import free_port

PASSWORD = "a long enough secret"


class Terminal(io.StringIO):
    """A standard input that says it is a terminal."""

    def isatty(self):
        return True


def run(capsys, monkeypatch, *argv, stdin=""):
    monkeypatch.setattr(sys, "stdin", stdin if isinstance(stdin, io.StringIO) else io.StringIO(stdin))
    code = cli.main(list(argv))
    out, err = capsys.readouterr()
    assert "Traceback" not in err
    return code, out, err


def test_add_reads_the_password_from_stdin_and_stores_only_a_hash(capsys, monkeypatch, redis_url):
    code, out, err = run(capsys, monkeypatch, "users", "add", "ana", "--admin", "--redis", redis_url,
                         stdin=PASSWORD + "\n")
    assert code == 0 and "ana" in out and err == ""
    assert UserStore(redis_url).verify("ana", PASSWORD)["admin"] is True
    stored = redis.Redis.from_url(redis_url).hget("bendline:user:ana", "password_hash")
    assert stored and PASSWORD.encode() not in stored and stored.decode() != PASSWORD


def test_add_asks_twice_on_a_terminal(capsys, monkeypatch, redis_url):
    answers = iter([PASSWORD, PASSWORD])
    monkeypatch.setattr(users_command.getpass, "getpass", lambda prompt="": next(answers))
    code, _, _ = run(capsys, monkeypatch, "users", "add", "bob", "--redis", redis_url, stdin=Terminal())
    assert code == 0 and UserStore(redis_url).verify("bob", PASSWORD)["admin"] is False

    answers = iter([PASSWORD, PASSWORD + "x"])
    code, _, err = run(capsys, monkeypatch, "users", "add", "cy", "--redis", redis_url, stdin=Terminal())
    assert code == 2 and "differ" in err and UserStore(redis_url).get("cy") is None


@pytest.mark.parametrize("name, stdin, words", [
    ("ana", "short\n", "at least 10 characters"),
    ("ana smith", PASSWORD + "\n", "not a usable user name"),
    ("ana", "", "no password on standard input"),
])
def test_add_refuses_bad_input_with_exit_2(capsys, monkeypatch, redis_url, name, stdin, words):
    code, out, err = run(capsys, monkeypatch, "users", "add", name, "--redis", redis_url, stdin=stdin)
    assert code == 2 and words in err and err.count("\n") == 1 and out == ""
    assert UserStore(redis_url).list() == []


def test_duplicate_and_unknown_users_exit_2(capsys, monkeypatch, redis_url):
    UserStore(redis_url).add("ana", PASSWORD)
    code, _, err = run(capsys, monkeypatch, "users", "add", "ana", "--redis", redis_url, stdin=PASSWORD + "\n")
    assert code == 2 and "already exists" in err
    for action in ("remove", "token", "revoke"):
        code, _, err = run(capsys, monkeypatch, "users", action, "nobody", "--redis", redis_url)
        assert code == 2 and "no user named 'nobody'" in err, action


def test_list_and_remove(capsys, monkeypatch, redis_url):
    code, out, err = run(capsys, monkeypatch, "users", "list", "--redis", redis_url)
    assert code == 0 and out == "" and "no users yet" in err
    store = UserStore(redis_url)
    store.add("ana", PASSWORD, admin=True)
    store.add("bob", PASSWORD)
    code, out, _ = run(capsys, monkeypatch, "users", "list", "--redis", redis_url)
    lines = out.splitlines()
    assert code == 0 and lines[0].split() == ["NAME", "ADMIN", "CREATED"]
    assert [ln.split()[:2] for ln in lines[1:]] == [["ana", "yes"], ["bob", "no"]]
    token = store.new_token("bob")
    code, out, _ = run(capsys, monkeypatch, "users", "remove", "bob", "--redis", redis_url)
    assert code == 0 and "1 token" in out
    assert store.get("bob") is None and store.user_for_token(token) is None


def test_token_is_the_last_line_and_works(capsys, monkeypatch, redis_url):
    store = UserStore(redis_url)
    store.add("ana", PASSWORD)
    code, out, _ = run(capsys, monkeypatch, "users", "token", "ana", "--redis", redis_url)
    lines = out.strip().splitlines()
    assert code == 0 and "only once" in lines[-2]
    assert store.user_for_token(lines[-1])["name"] == "ana"
    code, out, _ = run(capsys, monkeypatch, "users", "revoke", "ana", "--redis", redis_url)
    assert code == 0 and store.user_for_token(lines[-1]) is None


def test_redis_down_exits_1_naming_the_url_without_its_password(capsys, monkeypatch):
    url = f"redis://:t0p-secret@127.0.0.1:{free_port()}/0"
    for argv in (["list"], ["add", "ana"], ["token", "ana"], ["remove", "ana"]):
        code, _, err = run(capsys, monkeypatch, "users", *argv, "--redis", url, stdin=PASSWORD + "\n")
        assert code == 1, argv
        assert "cannot reach Redis at redis://***@127.0.0.1" in err and "t0p-secret" not in err
        assert err.count("\n") == 1


def test_a_url_that_is_not_redis_exits_2(capsys, monkeypatch):
    code, _, err = run(capsys, monkeypatch, "users", "list", "--redis", "http://example.invalid/")
    assert code == 2 and "is not a Redis URL" in err


def test_missing_redis_option_is_an_input_error(capsys, monkeypatch):
    monkeypatch.setattr(sys, "stdin", io.StringIO(""))
    with pytest.raises(SystemExit) as info:
        cli.main(["users", "list"])
    assert info.value.code == 2 and "--redis" in capsys.readouterr().err


@pytest.mark.parametrize("argv", [["users", "list", "--redis", "redis://127.0.0.1:1/0"],
                                  ["serve", "--team", "--redis", "redis://127.0.0.1:1/0"],
                                  ["worker", "--redis", "redis://127.0.0.1:1/0"]])
def test_team_mode_without_its_extra_says_how_to_install_it(monkeypatch, capsys, argv):
    from bendline.app import cli

    for name in list(sys.modules):
        if name.split(".")[0] in ("celery", "redis", "kombu") or name.startswith(("bendline.app.team",
                                                                                  "bendline.app.store.redis")):
            monkeypatch.delitem(sys.modules, name)
    for name in ("celery", "redis", "kombu"):
        monkeypatch.setitem(sys.modules, name, None)  # as if not installed
    assert cli.main(argv) == 1
    err = capsys.readouterr().err
    assert "team mode needs" in err and "pip install 'bendline[team]'" in err and "Traceback" not in err
