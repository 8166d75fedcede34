"""Sending over SMTP (forebrief.app.delivery), against real servers on 127.0.0.1 only.

Outside checks: an independent SMTP server implementation (aiosmtpd, the replacement the
Python documentation names for the removed ``smtpd`` module) receives the message; RFC 5321
(Klensin 2008) reply codes (550 mailbox unavailable, 553 mailbox name not allowed, 554
transaction failed, 535 authentication failed from RFC 4954) are what the refusing servers
send; RFC 3207 (Hoffman 2002): STARTTLS is only used when the server's EHLO offers it. Every
server here listens on 127.0.0.1 on a free port and stops by itself.
"""

from __future__ import annotations

import dataclasses
import email
import email.policy
import socket
import threading
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager, suppress
from email.message import EmailMessage
from typing import Any

import numpy as np
import pytest

from forebrief.app.delivery import (
    SendReceipt,
    password_from_env_or_prompt,
    recipients_of,
    send_message,
)
from forebrief.errors import DeliveryError

SENDER = "desk@health.example"
TO = ("lead@health.example", "chief@health.example")
PASSWORD = "s3cret-Pa55-word"


def _pdf_bytes() -> bytes:
    """Arbitrary binary content standing in for a PDF (seeded)."""
    rng = np.random.default_rng(20261130)
    return b"%PDF-1.7\n" + rng.integers(0, 256, size=20_000, dtype=np.uint8).tobytes()


PDF = _pdf_bytes()


def _message(to: tuple[str, ...] = TO, cc: tuple[str, ...] = ("analysts@health.example",)) -> bytes:
    msg = EmailMessage(policy=email.policy.SMTP)
    msg["Subject"] = "Weekly outlook: week of 30 November 2026"
    msg["From"] = SENDER
    msg["To"] = ", ".join(to)
    if cc:
        msg["Cc"] = ", ".join(cc)
    msg.set_content("The outlook.\n.\nA line that is only a dot, above (RFC 5321 4.5.2).\n")
    msg.add_attachment(PDF, maintype="application", subtype="pdf", filename="briefing.pdf")
    return msg.as_bytes()


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


@contextmanager
def smtp_server(handler: Any, **kwargs: Any) -> Iterator[int]:
    """An aiosmtpd Controller on 127.0.0.1 and a free port; stopped on leaving."""
    from aiosmtpd.controller import Controller

    port = _free_port()
    controller = Controller(handler, hostname="127.0.0.1", port=port, ready_timeout=10, **kwargs)
    controller.start()
    try:
        yield port
    finally:
        controller.stop()


class Keep:
    """Accepts everything and keeps each envelope."""

    def __init__(self) -> None:
        self.envelopes: list[Any] = []

    async def handle_DATA(self, server: Any, session: Any, envelope: Any) -> str:
        self.envelopes.append(envelope)
        return "250 2.0.0 Ok: queued as 4F2A"


class RefuseRcpt(Keep):
    """Refuses one mailbox with 550 (RFC 5321 4.2.3: mailbox unavailable)."""

    async def handle_RCPT(
        self, server: Any, session: Any, envelope: Any, address: str, rcpt_options: list[str]
    ) -> str:
        if address == "chief@health.example":
            return "550 5.1.1 <chief@health.example>: mailbox unavailable"
        envelope.rcpt_tos.append(address)
        return "250 OK"


class RefuseData(Keep):
    async def handle_DATA(self, server: Any, session: Any, envelope: Any) -> str:
        return "554 5.7.1 message content rejected"


class RefuseMail(Keep):
    async def handle_MAIL(
        self, server: Any, session: Any, envelope: Any, address: str, mail_options: list[str]
    ) -> str:
        return "553 5.7.1 sender not allowed"


@contextmanager
def raw_server(script: Callable[[socket.socket], None], *, lifetime: float = 5.0) -> Iterator[int]:
    """A one-connection TCP server on 127.0.0.1 running ``script``; bounded, stops itself."""
    listener = socket.socket()
    listener.bind(("127.0.0.1", 0))
    listener.listen(1)
    listener.settimeout(lifetime)
    port = int(listener.getsockname()[1])

    def serve() -> None:
        try:
            conn, _ = listener.accept()
        except OSError:
            return
        with conn:
            conn.settimeout(lifetime)
            with suppress(OSError):
                script(conn)

    thread = threading.Thread(target=serve, daemon=True)
    thread.start()
    try:
        yield port
    finally:
        listener.close()
        thread.join(lifetime + 1)
        assert not thread.is_alive()


def _send(port: int, **overrides: Any) -> SendReceipt:
    options: dict[str, Any] = {
        "sender": SENDER,
        "recipients": TO,
        "host": "127.0.0.1",
        "port": port,
        "security": "none",
        "timeout": 5.0,
    }
    options.update(overrides)
    message = options.pop("message", _message())
    return send_message(message, **options)


# --------------------------------------------------------------------------------------------
# delivered


def test_the_server_receives_envelope_and_message_byte_identical() -> None:
    handler = Keep()
    raw = _message()
    with smtp_server(handler) as port:
        receipt = _send(port, message=raw)
    assert len(handler.envelopes) == 1
    env = handler.envelopes[0]
    assert env.mail_from == SENDER
    assert tuple(env.rcpt_tos) == TO
    # the dot-only line was doubled on the wire and undone by the server (RFC 5321 4.5.2)
    assert env.original_content == raw
    got = email.message_from_bytes(env.original_content, policy=email.policy.default)
    assert next(got.iter_attachments()).get_content() == PDF
    assert receipt.recipients == TO
    assert receipt.server_reply == "250 2.0.0 Ok: queued as 4F2A"
    assert (receipt.host, receipt.port) == ("127.0.0.1", port)
    sent = dt_from_iso(receipt.time)
    assert sent.utcoffset() is not None
    assert sent.utcoffset().total_seconds() == 0


def dt_from_iso(text: str) -> Any:
    import datetime as dt

    return dt.datetime.fromisoformat(text)


def test_bare_line_feeds_go_out_as_crlf() -> None:
    # RFC 5321 2.3.8: lines end in CRLF on the wire; a file saved with LF is fixed on the way
    handler = Keep()
    raw = _message().replace(b"\r\n", b"\n")
    with smtp_server(handler) as port:
        _send(port, message=raw)
    content = handler.envelopes[0].original_content
    assert content == raw.replace(b"\n", b"\r\n")
    got = email.message_from_bytes(content, policy=email.policy.default)
    assert next(got.iter_attachments()).get_content() == PDF


def test_login_over_a_local_relay_then_delivery() -> None:
    from aiosmtpd.smtp import AuthResult, LoginPassword

    seen: list[tuple[bytes, bytes]] = []

    def check(
        server: Any, session: Any, envelope: Any, mechanism: str, auth_data: Any
    ) -> AuthResult:
        assert isinstance(auth_data, LoginPassword)
        seen.append((auth_data.login, auth_data.password))
        return AuthResult(success=auth_data.password == PASSWORD.encode(), handled=False)

    handler = Keep()
    with smtp_server(handler, authenticator=check, auth_require_tls=False) as port:
        _send(port, user="desk", password=PASSWORD)
    assert seen == [(b"desk", PASSWORD.encode())]
    assert len(handler.envelopes) == 1


# --------------------------------------------------------------------------------------------
# refused


def test_a_refused_recipient_stops_the_whole_send_and_names_the_code() -> None:
    handler = RefuseRcpt()
    with smtp_server(handler) as port, pytest.raises(DeliveryError) as info:
        _send(port)
    message = str(info.value)
    assert "550" in message
    assert "chief@health.example" in message
    assert "mailbox unavailable" in message
    assert "nothing was sent" in message
    assert handler.envelopes == []  # not even to the recipient the server accepted


def test_a_refused_message_names_the_code_and_text() -> None:
    with (
        smtp_server(RefuseData()) as port,
        pytest.raises(
            DeliveryError, match=r"refused the message \(554 5\.7\.1 message content rejected"
        ),
    ):
        _send(port)


def test_a_refused_sender_names_the_code() -> None:
    with (
        smtp_server(RefuseMail()) as port,
        pytest.raises(DeliveryError, match=r"refused the sender 'desk@health\.example' \(553"),
    ):
        _send(port)


def test_starttls_not_offered_is_refused_and_nothing_is_sent() -> None:
    # RFC 3207 section 4: STARTTLS only when the EHLO reply lists it
    handler = Keep()
    with (
        smtp_server(handler) as port,
        pytest.raises(DeliveryError, match=r"does not offer STARTTLS.*fix: use --ssl"),
    ):
        _send(port, security="starttls")
    assert handler.envelopes == []


def test_ssl_against_a_plain_server_says_the_handshake_failed() -> None:
    with smtp_server(Keep()) as port, pytest.raises(DeliveryError, match="TLS handshake failed"):
        _send(port, security="ssl")


def test_a_failed_login_never_shows_the_password() -> None:
    from aiosmtpd.smtp import AuthResult

    def refuse(*_args: Any) -> AuthResult:
        # handled=False: the server sends the 535 reply itself
        return AuthResult(success=False, handled=False)

    handler = Keep()
    with (
        smtp_server(handler, authenticator=refuse, auth_require_tls=False) as port,
        pytest.raises(DeliveryError) as info,
    ):
        _send(port, user="desk", password=PASSWORD)
    err = info.value
    assert "535" in str(err)
    assert "refused the login for 'desk'" in str(err)
    for text in (str(err), repr(err), str(err.__cause__), str(err.__context__)):
        assert PASSWORD not in text
    assert handler.envelopes == []


def test_a_password_is_not_sent_unencrypted_to_a_remote_host() -> None:
    # refused before any connection: the host below is never contacted
    with pytest.raises(DeliveryError, match=r"refusing to send the password .*--starttls") as i:
        send_message(
            _message(),
            sender=SENDER,
            recipients=TO,
            host="smtp.health.example",
            port=25,
            security="none",
            user="desk",
            password=PASSWORD,
        )
    assert PASSWORD not in str(i.value)


def test_a_user_without_a_password_is_refused() -> None:
    with pytest.raises(DeliveryError, match=r"user 'desk' is set but no password"):
        send_message(
            _message(),
            sender=SENDER,
            recipients=TO,
            host="127.0.0.1",
            port=25,
            security="starttls",
            user="desk",
        )


# --------------------------------------------------------------------------------------------
# no server, or a bad one


def test_connection_refused_on_a_closed_port() -> None:
    port = _free_port()  # bound then closed: nothing listens there
    with pytest.raises(
        DeliveryError,
        match=rf"127\.0\.0\.1:{port}: the connection was refused"
        r".*fix: check --smtp-host and --smtp-port",
    ):
        _send(port, password=None)


def test_a_server_that_accepts_then_closes_is_a_dropped_connection() -> None:
    with (
        raw_server(lambda conn: None) as port,
        pytest.raises(DeliveryError, match=r"dropped the connection"),
    ):
        _send(port)


def test_a_server_that_drops_during_the_message_is_a_dropped_connection() -> None:
    def script(conn: socket.socket) -> None:
        f = conn.makefile("rb")
        conn.sendall(b"220 relay.test ESMTP\r\n")
        for reply in (
            b"250 relay.test\r\n",
            b"250 OK\r\n",
            b"250 OK\r\n",
            b"250 OK\r\n",
            b"354 go ahead\r\n",
        ):
            if not f.readline():
                return
            conn.sendall(reply)
        f.readline()  # the first line of the message, then hang up

    with raw_server(script) as port, pytest.raises(DeliveryError, match="dropped the connection"):
        _send(port)


def test_a_silent_server_times_out() -> None:
    def silent(conn: socket.socket) -> None:
        time.sleep(1.5)

    started = time.monotonic()
    with raw_server(silent) as port, pytest.raises(DeliveryError, match=r"within 0\.5 s"):
        _send(port, timeout=0.5)
    assert time.monotonic() - started < 5


@pytest.mark.parametrize(
    ("field", "value"),
    [
        ("sender", "desk@health.example\r\nBcc: spy@elsewhere.example"),
        ("recipients", ("lead@health.example\nBcc: spy@elsewhere.example",)),
        ("recipients", ("lead@health.example\r",)),
    ],
)
def test_line_breaks_in_envelope_addresses_are_refused_before_connecting(
    field: str, value: Any
) -> None:
    handler = Keep()
    with smtp_server(handler) as port, pytest.raises(DeliveryError, match="line break"):
        _send(port, **{field: value})
    assert handler.envelopes == []


def test_bad_options_are_refused_with_the_choices() -> None:
    with pytest.raises(DeliveryError, match=r"'starttls', 'ssl', 'none'; got 'tls'"):
        _send(25, security="tls")
    with pytest.raises(DeliveryError, match=r"smtp_port 0"):
        _send(0)
    with pytest.raises(DeliveryError, match=r"no recipients"):
        _send(25, recipients=())


# --------------------------------------------------------------------------------------------
# recipients and password


def test_recipients_of_reads_to_and_cc_then_extra() -> None:
    raw = _message()
    expected = (*TO, "analysts@health.example")
    assert recipients_of(raw) == expected
    msg = email.message_from_bytes(raw, policy=email.policy.default)
    assert isinstance(msg, EmailMessage)
    assert recipients_of(msg, ["Extra <extra@health.example>", "LEAD@health.example"]) == (
        *expected,
        "extra@health.example",
    )  # duplicates dropped, ignoring case
    with pytest.raises(DeliveryError, match=r"--to .*line break"):
        recipients_of(raw, ["x@health.example\r\nBcc: spy@elsewhere.example"])
    with pytest.raises(DeliveryError, match=r"--to 'nobody': not a valid mail address"):
        recipients_of(raw, ["nobody"])
    with pytest.raises(DeliveryError, match="no To or Cc recipient"):
        recipients_of(_message(to=(), cc=()))


def test_password_from_the_environment(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("FOREBRIEF_TEST_PW", PASSWORD)

    def no_prompt(_text: str) -> str:
        raise AssertionError("must not prompt when the variable is set")

    assert (
        password_from_env_or_prompt(
            "FOREBRIEF_TEST_PW", user="desk", prompt=no_prompt, interactive=True
        )
        == PASSWORD
    )
    assert password_from_env_or_prompt("FOREBRIEF_TEST_PW", user=None) is None


def test_no_password_without_a_terminal(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("FOREBRIEF_TEST_PW", raising=False)
    asked: list[str] = []
    assert (
        password_from_env_or_prompt(
            "FOREBRIEF_TEST_PW", user="desk", prompt=asked.append, interactive=False
        )
        is None
    )
    assert asked == []
    # interactive=None asks the real stdin, which under pytest is not a terminal
    assert (
        password_from_env_or_prompt("FOREBRIEF_TEST_PW", user="desk", prompt=asked.append) is None
    )
    monkeypatch.setenv("FOREBRIEF_TEST_PW", "")  # empty counts as unset
    assert (
        password_from_env_or_prompt(
            "FOREBRIEF_TEST_PW", user="desk", prompt=asked.append, interactive=False
        )
        is None
    )


def test_prompt_when_unset_and_interactive(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.delenv("FOREBRIEF_TEST_PW", raising=False)
    asked: list[str] = []

    def typed(text: str) -> str:
        asked.append(text)
        return PASSWORD

    assert (
        password_from_env_or_prompt(
            "FOREBRIEF_TEST_PW", user="desk", prompt=typed, interactive=True
        )
        == PASSWORD
    )
    assert asked == ["SMTP password for desk: "]
    assert (
        password_from_env_or_prompt("FOREBRIEF_TEST_PW", user=None, prompt=typed, interactive=True)
        is None
    )
    assert len(asked) == 1  # no user: no prompt


def test_receipt_is_frozen() -> None:
    r = SendReceipt("2026-11-30T08:00:00+00:00", TO, "250 OK", "127.0.0.1", 25)
    with pytest.raises(dataclasses.FrozenInstanceError):
        r.host = "elsewhere"  # type: ignore[misc]
