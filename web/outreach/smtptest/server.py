# A mail server for cohortdesk's tests: aiosmtpd (Debian's python3-aiosmtpd)
# on the loopback, storing every message it accepts in a Maildir. The file
# named by CONTROL holds the mode, read at every transaction:
#   accept    take every message (the default)
#   refuse    answer RCPT TO with 550 (a permanent refusal)
#   defer     answer RCPT TO with 451 (a temporary one)
#   slow-ack  store the message, then wait an hour before answering 250, so a
#             test can kill the sender between the hand-over and its record
# Arguments: HOST PORT MAILDIR CONTROL TLS(none|starttls|implicit) CERT KEY USER PASSWORD
import asyncio
import mailbox
import signal
import ssl
import sys

from aiosmtpd.controller import Controller
from aiosmtpd.smtp import AuthResult

host, port, maildir, control, tls_mode, cert, key, user, password = sys.argv[1:10]
port = int(port)


def mode():
    try:
        with open(control) as f:
            return f.read().strip() or "accept"
    except FileNotFoundError:
        return "accept"


class Handler:
    def __init__(self):
        self.box = mailbox.Maildir(maildir, create=True)

    async def handle_RCPT(self, server, session, envelope, address, rcpt_options):
        m = mode()
        if m == "refuse":
            return "550 5.1.1 <%s>: mailbox unavailable" % address
        if m == "defer":
            return "451 4.3.0 <%s>: mailbox busy, try again later" % address
        envelope.rcpt_tos.append(address)
        return "250 2.1.5 OK"

    async def handle_DATA(self, server, session, envelope):
        head = "X-Test-Envelope: from=<%s> to=<%s> auth=%s tls=%s\r\n" % (
            envelope.mail_from, ">,<".join(envelope.rcpt_tos),
            "yes" if session.authenticated else "no",
            "yes" if session.ssl or server.transport.get_extra_info("ssl_object") else "no")
        stored = self.box.add(head.encode() + envelope.original_content)
        if mode() == "slow-ack":
            await asyncio.sleep(3600)
        return "250 2.0.0 stored as %s" % stored


def authenticator(server, session, envelope, mechanism, auth_data):
    ok = auth_data.login == user.encode() and auth_data.password == password.encode()
    return AuthResult(success=ok)


kwargs = dict(hostname=host, port=port, server_hostname="mail.test.invalid")
if tls_mode in ("starttls", "implicit"):
    ctx = ssl.create_default_context(ssl.Purpose.CLIENT_AUTH)
    ctx.load_cert_chain(cert, key)
    if tls_mode == "starttls":
        kwargs.update(tls_context=ctx, require_starttls=True)
    else:
        kwargs.update(ssl_context=ctx)
if user:
    kwargs.update(authenticator=authenticator, auth_required=True, auth_require_tls=True)

controller = Controller(Handler(), **kwargs)
controller.start()
print("READY", flush=True)
signal.sigwait({signal.SIGTERM, signal.SIGINT})
controller.stop()
