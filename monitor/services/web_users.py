"""People who sign in to the browser workspace of a shared programme: add, list, check a password.

Each person has the rights of one of the database groups of ``monitor access`` (reader, recorder, owner);
the workspace then works in the database under that group's role, so the database itself refuses what the
group may not do.
"""

from __future__ import annotations

import pandas as pd

from monitor.db import Store, select
from monitor.db import models as M
from monitor.errors import DataError, InputError, InputProblem
from monitor.security import MIN_PASSWORD_LENGTH, hash_password, verify_password

ROLES = M.WEB_ROLES
#: what each role may do in the workspace, the same as the database group of that name may do
RANK = {role: k for k, role in enumerate(ROLES)}


def add_user(db: str | None, login: str, role: str, password: str, *, replace: bool = False) -> str:
    """Add a person (or, with ``replace``, give an existing one a new role and password)."""
    login = (login or "").strip()
    if not login or len(login) > 80 or any(c.isspace() for c in login):
        raise InputError(InputProblem("web user", None, "LOGIN", login, "a login of 1-80 characters without spaces"))
    if role not in ROLES:
        raise InputError(InputProblem("web user", None, "ROLE", role, f"one of {', '.join(ROLES)}"))
    if len(password or "") < MIN_PASSWORD_LENGTH:
        raise InputError(InputProblem("web user", None, "password", None,
                                      f"a password of at least {MIN_PASSWORD_LENGTH} characters"))
    store = Store.open(db)
    try:
        with store.session() as session:
            user = session.exec(select(M.WebUser).where(M.WebUser.login == login)).first()
            if user is not None and not replace:
                raise DataError(f"web user {login} exists already; use --replace to change the role or password")
            if user is None:
                user = M.WebUser(login=login, role=role, password_hash=hash_password(password))
            else:
                user.role, user.password_hash, user.active = role, hash_password(password), True
            session.add(user)
        return f"web user {login} is a {role}"
    finally:
        store.dispose()


def list_users(db: str | None) -> pd.DataFrame:
    store = Store.open(db)
    try:
        return store.frame("SELECT login, role, active, created_at FROM web_user ORDER BY login")
    finally:
        store.dispose()


def check_password(db: str | None, login: str, password: str) -> str | None:
    """The person's role when the login is active and the password right; None otherwise."""
    store = Store.open(db)
    try:
        with store.session() as session:
            user = session.exec(select(M.WebUser).where(M.WebUser.login == (login or "").strip())).first()
            stored = (user.password_hash, user.role, user.active) if user is not None else None
    finally:
        store.dispose()
    if stored is None:
        # spend the same time as a real check, so that a wrong login cannot be told from a wrong password
        verify_password(password or "", _dummy_hash())
        return None
    digest, role, active = stored
    return role if verify_password(password or "", digest) and active else None


_DUMMY: list[str] = []


def _dummy_hash() -> str:
    if not _DUMMY:
        _DUMMY.append(hash_password("no such person"))
    return _DUMMY[0]


def role_urls(db: str | None) -> dict[str, str]:
    """Database URLs working under the reader, recorder and owner group roles (PostgreSQL)."""
    from monitor.db.roles import group_urls

    store = Store.open(db)
    try:
        return group_urls(store.engine)
    finally:
        store.dispose()



def check_database(db: str | None, programme_code: str | None = None) -> str:
    """The programme's name, once the database is known to be current and to hold the programme."""
    store = Store.open(db)
    try:
        return store.programme(programme_code).name
    finally:
        store.dispose()
