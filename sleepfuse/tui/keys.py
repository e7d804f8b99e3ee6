"""Keys typed ahead are handed on one at a time, each after the app has settled from the one before.

Textual routes a key to the widget that has focus when the key arrives and
queues it there at once, so keys typed ahead of a key that changes the screen
(x opening the review dialog, Enter opening a night) went to the old screen:
a reason typed right after x was lost, and a key after Enter could act on
the overview. Here the app holds raw keys in its own queue and releases the
next one only when every message queue of the app and its screens has been
empty for a few checks (at most ``SETTLE_MAX_S``), so each key meets the
focus, screen and cursor the key before it left.
"""

from __future__ import annotations

import asyncio
from collections import deque

from textual import events

SETTLE_CHECKS = 3  # consecutive quiet checks before the next key goes
SETTLE_STEP_S = 0.002
SETTLE_MAX_S = 0.5  # never hold a key longer than this, whatever is still running


class KeysInOrder:
    """App mixin: raw keys pass through ``_release`` one at a time (put it before ``App`` in the bases)."""

    def _held_keys(self) -> deque:
        held = self.__dict__.get("_sleepfuse_keys")
        if held is None:
            held = self.__dict__["_sleepfuse_keys"] = deque()
        return held

    async def on_event(self, event: events.Event) -> None:
        if isinstance(event, events.Key) and not event.is_forwarded and not getattr(event, "sleepfuse_released", False):
            held = self._held_keys()
            held.append(event)
            if len(held) == 1:
                self._release_task = asyncio.create_task(self._release())
            return
        await super().on_event(event)

    async def _release(self) -> None:
        held = self._held_keys()
        while held:
            event = held[0]
            event.sleepfuse_released = True
            self.post_message(event)  # handled by Textual's own key routing, now with the focus of today
            await self._settled()
            held.popleft()

    def _busy(self) -> bool:
        if self.message_queue_size:
            return True
        for screen in self.screen_stack:
            for node in screen.walk_children(with_self=True):
                if node.message_queue_size:
                    return True
        return False

    async def _settled(self) -> None:
        loop = asyncio.get_running_loop()
        end = loop.time() + SETTLE_MAX_S
        quiet = 0
        while quiet < SETTLE_CHECKS and loop.time() < end:
            await asyncio.sleep(SETTLE_STEP_S)
            quiet = 0 if self._busy() else quiet + 1
