#!/usr/bin/env python3
"""Test SMTP server for seepd's tests and benchmark: aiosmtpd's Controller with a Maildir handler.

Run with /usr/bin/python3 (Debian python3-aiosmtpd). Listens on 127.0.0.1 only.

  --port N              port to listen on (required)
  --maildir DIR         where accepted messages go (a Maildir; created)
  --cert F --key F      offer STARTTLS with this certificate and require it before MAIL
  --auth USER:PASS      require AUTH (PLAIN/LOGIN) with this one test user (needs --cert)
  --implicit-tls        TLS from the first byte instead of STARTTLS (with --cert/--key)
  --reject              answer every DATA with 550 (a permanent refusal)
  --refuse ADDR         answer RCPT TO:<ADDR> with 550 (repeatable; other recipients accepted)
  --defer ADDR          answer RCPT TO:<ADDR> with 450 (repeatable; a temporary refusal)
  --log FILE            append one line per accepted message: time, Message-ID, Subject,
                        recipients (comma-separated)
"""
import argparse
import email
import signal
import ssl
import threading
import time

from aiosmtpd.controller import Controller
from aiosmtpd.handlers import Mailbox
from aiosmtpd.smtp import AuthResult


class Recipients:
    """RCPT TO: refuse (550) or defer (450) the listed addresses, accept the others."""

    refuse = ()
    defer = ()

    async def handle_RCPT(self, server, session, envelope, address, rcpt_options):
        if address.lower() in self.refuse:
            return "550 5.1.1 <%s>: mailbox unavailable (test server refuse list)" % address
        if address.lower() in self.defer:
            return "450 4.2.1 <%s>: mailbox busy, try later (test server defer list)" % address
        envelope.rcpt_tos.append(address)
        return "250 OK"


class Rejecting(Recipients):
    async def handle_DATA(self, server, session, envelope):
        return "550 5.7.1 Rejected by the test server (reject mode)"


class Logging(Recipients, Mailbox):
    def __init__(self, maildir, log):
        super().__init__(maildir)
        self.log = log

    def handle_message(self, message):
        super().handle_message(message)
        if self.log:
            with open(self.log, "a") as f:
                f.write(
                    "%.6f\t%s\t%s\t%s\n"
                    % (
                        time.time(),
                        message.get("Message-ID", ""),
                        message.get("Subject", ""),
                        message.get("X-RcptTo", ""),
                    )
                )


def main():
    p = argparse.ArgumentParser()
    p.add_argument("--port", type=int, required=True)
    p.add_argument("--maildir", required=True)
    p.add_argument("--cert")
    p.add_argument("--key")
    p.add_argument("--auth")
    p.add_argument("--implicit-tls", action="store_true")
    p.add_argument("--reject", action="store_true")
    p.add_argument("--refuse", action="append", default=[])
    p.add_argument("--defer", action="append", default=[])
    p.add_argument("--log")
    a = p.parse_args()

    handler = Rejecting() if a.reject else Logging(a.maildir, a.log)
    handler.refuse = {x.lower() for x in a.refuse}
    handler.defer = {x.lower() for x in a.defer}
    kw = {}
    if a.cert:
        ctx = ssl.create_default_context(ssl.Purpose.CLIENT_AUTH)
        ctx.load_cert_chain(a.cert, a.key)
        if a.implicit_tls:
            kw.update(ssl_context=ctx)
        else:
            kw.update(tls_context=ctx, require_starttls=True)
    if a.auth:
        user, password = a.auth.split(":", 1)

        def check(server, session, envelope, mechanism, auth_data):
            ok = (auth_data.login or b"").decode() == user and (
                auth_data.password or b""
            ).decode() == password
            return AuthResult(success=ok)

        kw.update(authenticator=check, auth_required=True, auth_require_tls=True)
    ctl = Controller(handler, hostname="127.0.0.1", port=a.port, **kw)
    ctl.start()
    done = threading.Event()
    signal.signal(signal.SIGTERM, lambda *_: done.set())
    signal.signal(signal.SIGINT, lambda *_: done.set())
    print("READY", flush=True)
    done.wait()
    ctl.stop()


if __name__ == "__main__":
    main()
