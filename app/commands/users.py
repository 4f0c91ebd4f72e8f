"""``bendline users ...``: sign-in accounts and tokens of a team server.

``add NAME [--admin]``, ``remove NAME``, ``list``, ``token NAME`` and
``revoke NAME``, each with ``--redis URL``. Exit status 0 on success, 2 for
bad input (unknown or duplicate user, bad name, short password, bad URL), 1
when Redis cannot be reached; always a one-line message, never a traceback.
"""

from __future__ import annotations

import getpass
import sys

from .common import EXIT_ERROR, EXIT_INPUT, EXIT_OK


def register(sub):
    """Add ``users`` and its subcommands to an argparse subparsers object."""
    p = sub.add_parser("users", help="manage the sign-in accounts of a team server",
                       description="Add, remove and list team-mode users; make sign-in tokens.")
    usub = p.add_subparsers(dest="users_command", required=True, metavar="ACTION")

    a = usub.add_parser("add", help="add a user (asks for the password)",
                        description="Add a user. The password is asked twice on a terminal, "
                                    "otherwise read as one line from standard input.")
    a.add_argument("name", metavar="NAME", help="1-64 letters, digits, '.', '_' or '-'")
    a.add_argument("--admin", action="store_true", help="may stop or delete anyone's runs")
    _redis_argument(a)
    a.set_defaults(handler=_guard(run_add))

    r = usub.add_parser("remove", help="remove a user and revoke its tokens")
    r.add_argument("name", metavar="NAME")
    _redis_argument(r)
    r.set_defaults(handler=_guard(run_remove))

    ls = usub.add_parser("list", help="list the users")
    _redis_argument(ls)
    ls.set_defaults(handler=_guard(run_list))

    t = usub.add_parser("token", help="make a new sign-in token for a user (shown once)")
    t.add_argument("name", metavar="NAME")
    _redis_argument(t)
    t.set_defaults(handler=_guard(run_token))

    v = usub.add_parser("revoke", help="revoke every token of a user")
    v.add_argument("name", metavar="NAME")
    _redis_argument(v)
    v.set_defaults(handler=_guard(run_revoke))


def _redis_argument(p):
    p.add_argument("--redis", required=True, metavar="URL",
                   help="the team's Redis URL (redis://HOST:PORT/DB)")


def _guard(handler):
    """Run a handler; user errors exit 2 and an unreachable Redis exits 1, each with one line."""

    def run(args):
        from ..store import BadRedisUrl, StoreUnavailable  # team extras load only when used
        from ..team.users import UserError

        where = f"bendline users {args.users_command}"
        try:
            return handler(args)
        except (UserError, BadRedisUrl) as exc:
            sys.stderr.write(f"{where}: {exc}\n")
            return EXIT_INPUT
        except StoreUnavailable as exc:
            sys.stderr.write(f"{where}: {exc}; is Redis running, and is the URL right?\n")
            return EXIT_ERROR

    return run


def _store(args):
    from ..team.users import UserStore

    return UserStore(args.redis)


def read_password(name):
    """The new password: asked twice on a terminal, else one line of standard input.

    Raises
    ------
    app.team.users.UserError
        When nothing was given or the two entries differ.
    """
    from ..team.users import UserError

    if sys.stdin is not None and sys.stdin.isatty():
        try:
            first = getpass.getpass(f"Password for {name} (at least 10 characters): ")
            second = getpass.getpass("The same password again: ")
        except EOFError:
            raise UserError("no password was given; nothing was changed") from None
        if first != second:
            raise UserError("the two passwords differ; nothing was changed")
        return first
    line = sys.stdin.readline() if sys.stdin is not None else ""
    if not line:
        raise UserError("no password on standard input: give it as one line, "
                        "or run the command in a terminal to be asked for it")
    return line.rstrip("\r\n")


def run_add(args):
    from ..team.users import UserError, check_name

    check_name(args.name)
    store = _store(args)
    if store.get(args.name) is not None:  # say so before asking for a password
        raise UserError(f"a user named {args.name!r} already exists")
    user = store.add(args.name, read_password(args.name), admin=args.admin)
    sys.stdout.write(f"Added user {user['name']}{' (admin)' if user['admin'] else ''}.\n")
    return EXIT_OK


def run_remove(args):
    revoked = _store(args).remove(args.name)
    sys.stdout.write(f"Removed user {args.name} and revoked {revoked} token(s).\n")
    return EXIT_OK


def run_list(args):
    users = _store(args).list()
    if not users:
        sys.stderr.write("bendline users list: no users yet; add one with "
                         "bendline users add NAME --admin --redis URL\n")
        return EXIT_OK
    width = max(4, *(len(u["name"]) for u in users))
    sys.stdout.write(f"{'NAME':<{width}}  ADMIN  CREATED\n")
    for u in users:
        sys.stdout.write(f"{u['name']:<{width}}  {'yes' if u['admin'] else 'no':<5}  {u['created_at'] or '-'}\n")
    return EXIT_OK


def run_token(args):
    token = _store(args).new_token(args.name)
    sys.stdout.write(f"A new sign-in token for {args.name}. It is shown only once and cannot be "
                     "read back; keep it somewhere safe:\n")
    sys.stdout.write(token + "\n")
    return EXIT_OK


def run_revoke(args):
    from ..team.users import UnknownUser

    store = _store(args)
    if store.get(args.name) is None:
        raise UnknownUser(f"there is no user named {args.name!r}")
    n = store.revoke_tokens(args.name)
    sys.stdout.write(f"Revoked {n} token(s) of {args.name}.\n")
    return EXIT_OK
