"""Which webhook targets may be called: http(s) URLs whose addresses are public.

Loopback, private, link-local, multicast and reserved addresses are refused (a key holder
must not make the service call its own network) unless the settings allow them.
"""

from __future__ import annotations

import ipaddress
import socket
from urllib.parse import urlsplit

from service.config import get_settings


class TargetRefused(ValueError):
    """A URL the service will not call; the message says why."""


def _addresses(host: str) -> list[ipaddress.IPv4Address | ipaddress.IPv6Address]:
    try:
        return [ipaddress.ip_address(host.strip("[]"))]
    except ValueError:
        pass
    try:
        infos = socket.getaddrinfo(host, None, type=socket.SOCK_STREAM)
    except (socket.gaierror, UnicodeError) as exc:
        raise TargetRefused(f"host {host!r} does not resolve") from exc
    return [ipaddress.ip_address(str(info[4][0]).split("%")[0]) for info in infos]


def check_target(url: str) -> None:
    """Raise TargetRefused unless the URL is http(s) to addresses the settings allow."""
    parts = urlsplit(url)
    if parts.scheme not in ("http", "https"):
        raise TargetRefused("the URL must be http or https")
    if not parts.hostname:
        raise TargetRefused("the URL has no host")
    if parts.username or parts.password:
        raise TargetRefused("the URL must not carry credentials")
    settings = get_settings()
    for addr in _addresses(parts.hostname):
        if addr.is_loopback:
            if not settings.webhook_allow_loopback:
                raise TargetRefused(f"{addr} is a loopback address (webhook_allow_loopback)")
            continue
        if (
            addr.is_private
            or addr.is_link_local
            or addr.is_multicast
            or addr.is_reserved
            or addr.is_unspecified
        ) and not settings.webhook_allow_private:
            raise TargetRefused(f"{addr} is a private or reserved address (webhook_allow_private)")
