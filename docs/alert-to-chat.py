#!/usr/bin/env python3
"""Post a tocsin alert (JSON on standard input) to a chat webhook ($CHAT_WEBHOOK_URL)."""
import json
import os
import sys
import urllib.request

alert = json.load(sys.stdin)
chance = "" if alert["probability"] is None else f" ({alert['probability']:.0%} chance)"
text = (f"tocsin {alert['state'].upper()}: {alert['job']}: "
        f"{'event' if alert['forecast'] else 'no event'} forecast for {alert['period']}{chance} "
        f"by the {alert['method']} method. {alert['caution']}")
request = urllib.request.Request(os.environ["CHAT_WEBHOOK_URL"], method="POST",
                                 data=json.dumps({"text": text}).encode("utf-8"),
                                 headers={"Content-Type": "application/json"})
try:
    with urllib.request.urlopen(request, timeout=20) as answer:
        answer.read()
except Exception as exc:  # the last stderr line shows in tocsin's log; exit 1 makes tocsin retry
    print(f"chat webhook failed: {exc}", file=sys.stderr)
    sys.exit(1)
