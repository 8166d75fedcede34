"""Sending a record's e-mail over SMTP (:mod:`smtplib`), and the password it may need.

The message travels as the exact bytes archived in the record (``briefing.eml``); bare line
feeds are turned into CRLF on the way, as SMTP requires (RFC 5321 section 2.3.8). The
transaction is all or nothing: if the server refuses the sender, any recipient or the
message, the transaction is reset and nothing is delivered to anyone, so a successful
:class:`SendReceipt` names exactly who received it.

Security: ``starttls`` (port 587, RFC 3207) and ``ssl`` (port 465, RFC 8314) verify the
server's certificate with :func:`ssl.create_default_context`; ``none`` is plain SMTP, for a
relay that needs no password, and a password is only ever sent over TLS or to a relay on this
machine (127.0.0.1, ::1, localhost). The password is never put in an error message, and the
password itself comes from an environment variable or a prompt
(:func:`password_from_env_or_prompt`), never from the configuration file.

Every failure raises :class:`forebrief.errors.DeliveryError` with the reason (the server's
code and text where it gave one) and the fix. Cost: one SMTP session; the message is sent
once, in one DATA command.
"""

from __future__ import annotations

import datetime as dt
import getpass
import os
import re
import smtplib
import socket
import ssl
import sys
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from email import message_from_bytes
from email import policy as email_policy
from email.message import EmailMessage
from typing import Literal, get_args

from forebrief.errors import DeliveryError
from forebrief.report.render.email import check_address, check_header_text

__all__ = [
    "Security",
    "SendReceipt",
    "password_from_env_or_prompt",
    "recipients_of",
    "send_message",
]

Security = Literal["starttls", "ssl", "none"]
_SECURITY: tuple[str, ...] = get_args(Security)
_LOOPBACK = {"127.0.0.1", "::1", "localhost"}
_BARE_LF = re.compile(rb"(?<!\r)\n")
_BARE_CR = re.compile(rb"\r(?!\n)")


@dataclass(frozen=True)
class SendReceipt:
    """What the record's log notes about a successful send."""

    time: str
    recipients: tuple[str, ...]
    server_reply: str
    host: str
    port: int


# --------------------------------------------------------------------------------------------
# addresses and password


def recipients_of(message: EmailMessage | bytes, extra: Sequence[str] = ()) -> tuple[str, ...]:
    """The envelope recipients: the message's To and Cc addresses, then ``extra``, validated.

    Each address is checked as when the message was built (no line break or control
    character, one well-formed address); duplicates are dropped (compared ignoring case).
    """
    msg = (
        message
        if isinstance(message, EmailMessage)
        else message_from_bytes(bytes(message), policy=email_policy.default)
    )
    found: list[tuple[str, str]] = []
    for field in ("To", "Cc"):
        for header in msg.get_all(field, []):
            addresses = getattr(header, "addresses", None)
            if addresses is None:
                raise DeliveryError(
                    f"e-mail header {field} {str(header)!r}: cannot be read as "
                    "addresses; fix: rebuild the record's e-mail"
                )
            for a in addresses:
                found.append((field, a.addr_spec))
    found.extend(("--to", str(x)) for x in extra)
    out: list[str] = []
    seen: set[str] = set()
    for field, value in found:
        spec = check_address(value, field=field).addr_spec
        if spec.lower() not in seen:
            seen.add(spec.lower())
            out.append(spec)
    if not out:
        raise DeliveryError(
            "e-mail: the message has no To or Cc recipient and none was given; "
            "fix: pass --to ADDRESS, or set [email] to in forebrief.toml and "
            "rebuild the record"
        )
    return tuple(out)


def password_from_env_or_prompt(
    env_var: str,
    *,
    user: str | None,
    prompt: Callable[[str], str] = getpass.getpass,
    interactive: bool | None = None,
) -> str | None:
    """The SMTP password: from ``env_var``, else typed at a prompt, else None.

    Without a ``user`` there is nothing to log in with, so the answer is None. The prompt is
    only shown when stdin is a terminal (``interactive=None`` asks ``sys.stdin.isatty()``);
    an empty variable counts as unset. The password is never read from the configuration.
    """
    if not user:
        return None
    value = os.environ.get(env_var) if env_var else None
    if value:
        return value
    if interactive is None:
        try:
            interactive = bool(sys.stdin is not None and sys.stdin.isatty())
        except (AttributeError, ValueError, OSError):
            interactive = False
    if not interactive:
        return None
    try:
        typed = prompt(f"SMTP password for {user}: ")
    except EOFError:
        return None
    return typed or None


# --------------------------------------------------------------------------------------------
# sending


def _text(reply: bytes | str) -> str:
    s = reply.decode("utf-8", "replace") if isinstance(reply, bytes) else str(reply)
    return " / ".join(line.strip() for line in s.splitlines() if line.strip())


def _crlf(message: bytes) -> bytes:
    return _BARE_LF.sub(b"\r\n", _BARE_CR.sub(b"\r\n", message))


def _check_options(
    sender: str,
    recipients: Sequence[str],
    host: str,
    port: int,
    security: str,
    user: str | None,
    password: str | None,
    timeout: float,
) -> tuple[str, tuple[str, ...]]:
    if security not in _SECURITY:
        raise DeliveryError(
            f"e-mail security must be one of {', '.join(map(repr, _SECURITY))}; "
            f"got {security!r}; fix: pass --starttls or --ssl, or set [email] "
            "security"
        )
    check_header_text(
        host, field="smtp_host", fix="give the SMTP server's host name, such as smtp.agency.example"
    )
    if not host.strip():
        raise DeliveryError(
            "e-mail smtp_host: no SMTP server is set; fix: pass --smtp-host "
            "or set [email] smtp_host in forebrief.toml"
        )
    if isinstance(port, bool) or not isinstance(port, int) or not 1 <= port <= 65535:
        raise DeliveryError(
            f"e-mail smtp_port {port!r}: not a port number; fix: use 587 for "
            "starttls, 465 for ssl, or 25 for a local relay"
        )
    if not timeout > 0:
        raise DeliveryError(f"e-mail timeout {timeout!r}: must be a positive number of seconds")
    env_sender = check_address(sender, field="sender").addr_spec
    if not recipients:
        raise DeliveryError("e-mail: no recipients; fix: pass --to ADDRESS or set [email] to")
    rcpts = tuple(check_address(r, field="recipient").addr_spec for r in recipients)
    if user is not None:
        check_header_text(user, field="user", fix="give the SMTP user name on one line")
    if user and not password:
        raise DeliveryError(
            f"e-mail: SMTP user {user!r} is set but no password was given; fix: set the "
            "environment variable named by [email] password_env, or run forebrief send in a "
            "terminal to type it"
        )
    if password and not user:
        raise DeliveryError(
            "e-mail: a password was given but no SMTP user; fix: pass --user or set [email] user"
        )
    if user and security == "none" and host.strip().lower() not in _LOOPBACK:
        raise DeliveryError(
            f"e-mail: refusing to send the password for {user!r} unencrypted to {host}; "
            "nothing was sent; fix: use --starttls (port 587) or --ssl (port 465)"
        )
    return env_sender, rcpts


def send_message(
    message: bytes,
    *,
    sender: str,
    recipients: Sequence[str],
    host: str,
    port: int,
    security: Security,
    user: str | None = None,
    password: str | None = None,
    timeout: float = 30.0,
) -> SendReceipt:
    """Send ``message`` (the exact bytes of ``briefing.eml``) to ``recipients`` over SMTP.

    ``sender`` and ``recipients`` are the envelope (RFC 5321 MAIL FROM and RCPT TO); every
    address is re-checked for line breaks first. Raises :class:`DeliveryError` on a refused
    connection, a timeout, a dropped connection, a TLS or login failure, or a refusal of the
    sender, a recipient or the message (with the server's code and text); the password never
    appears in the message. Returns the time (ISO 8601, UTC), the recipients and the server's
    reply to the message.
    """
    env_sender, rcpts = _check_options(
        sender, recipients, host, port, security, user, password, timeout
    )
    data = _crlf(bytes(message))
    where = f"{host}:{port}"

    def hide(text: str) -> str:
        return text.replace(password, "[password]") if password else text

    def fail(reason: str, fix: str) -> DeliveryError:
        return DeliveryError(
            hide(f"e-mail not sent to {where}: {reason}; nothing was sent; fix: {fix}")
        )

    smtp: smtplib.SMTP | None = None
    try:
        try:
            if security == "ssl":
                smtp = smtplib.SMTP_SSL(
                    host, port, timeout=timeout, context=ssl.create_default_context()
                )
            else:
                smtp = smtplib.SMTP(host, port, timeout=timeout)
            code, reply = smtp.ehlo()
            if code != 250:
                code, reply = smtp.helo()
                if code != 250:
                    raise fail(
                        f"the server refused the greeting ({code} {_text(reply)})",
                        "check that this is an SMTP server",
                    )
            if security == "starttls":
                if not smtp.has_extn("starttls"):
                    raise fail(
                        "the server does not offer STARTTLS, and the message is not "
                        "sent unencrypted",
                        "use --ssl (usually port 465) if the server expects TLS from "
                        'the start, or security = "none" only for a trusted relay',
                    )
                code, reply = smtp.starttls(context=ssl.create_default_context())
                if code != 220:
                    raise fail(
                        f"STARTTLS was refused ({code} {_text(reply)})",
                        "check the server's TLS settings",
                    )
                smtp.ehlo()
            if user:
                try:
                    smtp.login(user, password or "")
                except smtplib.SMTPAuthenticationError as exc:
                    raise fail(
                        f"the server refused the login for {user!r} ({exc.smtp_code} "
                        f"{hide(_text(exc.smtp_error))})",
                        "check --user and the password in the environment variable "
                        "named by [email] password_env",
                    ) from None
                except smtplib.SMTPNotSupportedError:
                    raise fail(
                        "the server does not offer a login (no AUTH)",
                        "leave out --user, or use the server's submission port",
                    ) from None
                except (smtplib.SMTPServerDisconnected, smtplib.SMTPResponseException):
                    raise
                except smtplib.SMTPException as exc:  # no method in common
                    raise fail(
                        f"the login failed ({hide(str(exc))})", "check the server's login methods"
                    ) from None
            options = [f"SIZE={len(data)}"] if smtp.has_extn("size") else []
            code, reply = smtp.mail(env_sender, options)
            if code != 250:
                smtp.rset()
                raise fail(
                    f"the server refused the sender {env_sender!r} ({code} {_text(reply)})",
                    "use a sender address the server accepts ([email] from)",
                )
            refused = []
            for r in rcpts:
                code, reply = smtp.rcpt(r)
                if code not in (250, 251):
                    refused.append(f"{r!r} ({code} {_text(reply)})")
            if refused:
                smtp.rset()
                raise fail(
                    "the server refused the recipient(s) " + ", ".join(refused),
                    "correct or remove those addresses; the others were not sent the "
                    "message either",
                )
            code, reply = smtp.data(data)
            if code != 250:
                smtp.rset()
                raise fail(
                    f"the server refused the message ({code} {_text(reply)})",
                    "read the server's reason above; the record is unchanged",
                )
            server_reply = f"{code} {_text(reply)}"
        except smtplib.SMTPDataError as exc:
            raise fail(
                f"the server refused the message ({exc.smtp_code} {_text(exc.smtp_error)})",
                "read the server's reason",
            ) from None
        except smtplib.SMTPServerDisconnected as exc:
            if "timed out" in str(exc):
                raise fail(
                    f"the server did not answer within {timeout:g} s (timeout)",
                    "check the host and port, or try again later",
                ) from None
            raise fail(
                f"the server dropped the connection (closed it unexpectedly: {exc})",
                "try again later, and check the port and security setting (587 with "
                "--starttls, 465 with --ssl)",
            ) from None
        except smtplib.SMTPConnectError as exc:
            raise fail(
                f"the server refused the session ({exc.smtp_code} {_text(exc.smtp_error)})",
                "try again later",
            ) from None
        except smtplib.SMTPResponseException as exc:
            raise fail(
                f"the server answered {exc.smtp_code} {_text(exc.smtp_error)}",
                "read the server's reason",
            ) from None
        except ssl.SSLCertVerificationError as exc:
            raise fail(
                f"the server's TLS certificate could not be verified ({exc.verify_message})",
                "use the server's proper host name; the certificate must be valid for it",
            ) from None
        except ssl.SSLError as exc:
            raise fail(
                f"the TLS handshake failed ({exc.reason or exc})",
                "use --starttls for port 587, --ssl for port 465",
            ) from None
        except ConnectionRefusedError:
            raise fail(
                "the connection was refused (no SMTP server is listening there)",
                "check --smtp-host and --smtp-port ([email] smtp_host, smtp_port)",
            ) from None
        except TimeoutError:
            raise fail(
                f"the server did not answer within {timeout:g} s (timeout)",
                "check the host and port, or try again later",
            ) from None
        except socket.gaierror as exc:
            raise fail(
                f"the host name {host!r} could not be found ({exc.strerror})",
                "check --smtp-host ([email] smtp_host)",
            ) from None
        except smtplib.SMTPException as exc:
            raise fail(f"SMTP error ({hide(str(exc))})", "check the server settings") from None
        except OSError as exc:
            raise fail(
                f"network error ({exc.strerror or exc})", "check the host, port and network"
            ) from None
    except BaseException:
        if smtp is not None:
            smtp.close()  # no QUIT: the session failed, and a silent server would delay it
        raise
    assert smtp is not None
    try:
        smtp.quit()  # the message is already accepted; a failed goodbye changes nothing
    except (smtplib.SMTPException, OSError):
        smtp.close()
    return SendReceipt(
        time=dt.datetime.now(dt.UTC).replace(microsecond=0).isoformat(),
        recipients=rcpts,
        server_reply=server_reply,
        host=host,
        port=port,
    )
