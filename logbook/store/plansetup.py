"""The plan's standing assumptions (``plan_setup.PlanSetup``), stored as the setting 'plan': read,
checked and written in one transaction, audited like every change."""

from __future__ import annotations

import json

from logbook.model import InputRejected
from logbook.plan_setup import PlanSetup
from logbook.store.base import StorePart

KEY = "plan"


class PlanSetupMixin(StorePart):
    def plan_setup(self) -> PlanSetup:
        """The stored plan assumptions, or the defaults when none were set."""
        row = next(iter(self.db.query("SELECT value FROM settings WHERE key = ?", [KEY])), None)
        return PlanSetup.from_dict(json.loads(row["value"])) if row else PlanSetup()

    def set_plan_setup(self, setup: PlanSetup) -> PlanSetup:
        """Store ``setup`` after checking every value (sites and models must be recorded)."""
        with self.transaction():
            sites = {m.site for m in self.machines().values()}
            problems = setup.problems(sites=sites, models=set(self.models()))
            if problems:
                raise InputRejected(problems)
            old = self.plan_setup()
            if old == setup:
                return setup
            self.conn.execute("INSERT INTO settings (key, value) VALUES (?, ?) "
                              "ON CONFLICT(key) DO UPDATE SET value = excluded.value",
                              (KEY, json.dumps(setup.as_dict(), sort_keys=True)))
            self._audit("set", "settings", KEY, None, old.as_dict(), setup.as_dict())
        return setup
