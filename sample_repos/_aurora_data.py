"""Invented cast and layout of the aurora-fw demo project (no real people or projects)."""
from __future__ import annotations

import datetime as dt
from dataclasses import dataclass

UTC = dt.timezone.utc
COMPANY_DOMAIN = "halvard.example.com"
LIST_ADDRESS = "aurora-dev@lists.example.org"
STABLE_ADDRESS = "stable@example.org"


@dataclass(frozen=True)
class Person:
    key: str
    name: str
    email: str
    tz: str                       # fixed UTC offset, git raw format (+hhmm)
    affinity: tuple[str, ...]     # subsystem keys this person mostly works on
    active_from: dt.date = dt.date(2019, 1, 1)
    active_to: dt.date = dt.date(2099, 1, 1)
    new_email: str = ""           # second address, used from EMAIL_SWITCH on
    email_switch: dt.date | None = None

    def email_at(self, day: dt.date) -> str:
        if self.new_email and self.email_switch and day >= self.email_switch:
            return self.new_email
        return self.email

    def active(self, day: dt.date) -> bool:
        return self.active_from <= day < self.active_to


C = COMPANY_DOMAIN
PEOPLE: tuple[Person, ...] = (
    Person("ines", "Ines Vardakis", f"ines.vardakis@{C}", "+0100", ("hal", "boot", "docs")),
    Person("tobiah", "Tobiah Wrenfield", f"tobiah@{C}", "-0500", ("can", "hal")),
    Person("kaito", "Kaito Brennholt", f"k.brennholt@{C}", "+0900", ("adc", "sensors", "calib"),
           new_email="kaito@brennholt.example.net", email_switch=dt.date(2021, 4, 1)),
    Person("ylva", "Ylva Þórsnes-Kärrberg", "ylva.thorsnes@example.org", "+0100",
           ("sched", "sync")),
    Person("desmond", "Desmond Okafor-Lindqvist", f"desmond@{C}", "+0000", ("power", "pwm")),
    Person("priya", "Priyamvada Castellanos", "priya.c@example.org", "+0530", ("mqtt", "tools"),
           active_from=dt.date(2020, 2, 1)),
    Person("ruben", "Ruben Kessel-Amari", f"ruben.ka@{C}", "+0200", ("motor", "pwm")),
    Person("auden", "Auden Mirskaya", "auden@example.org", "+0300", ("tools", "docs")),
    Person("lio", "Lio Hartsfeld", "lio.hartsfeld@example.com", "-0800", ("sensors", "adc"),
           active_to=dt.date(2024, 1, 1)),
    Person("noor", "Noor Vellacott", f"noor@{C}", "+0400", ("pwm", "motor")),
    Person("fenna", "Fenna Rautio-Blake", "fenna@example.com", "+0200", ("docs", "boot")),
    Person("caspian", "Caspian Ujiie", "caspian.u@example.org", "+0900", ("sched", "mqtt")),
    Person("margit", "Margit Quenneville", f"margit@{C}", "+0100", ("can", "sync")),
    Person("elias", "Elias Drummond-Pike", "elias.dp@example.net", "-0300", ("power", "motor"),
           active_from=dt.date(2021, 9, 1)),
    Person("saoirse", "Saoirse Vantongeren", f"saoirse@{C}", "+0000", ("boot", "hal", "vendor")),
)
PERSON = {p.key: p for p in PEOPLE}
RELEASE_MANAGER = "ines"


@dataclass(frozen=True)
class Subsystem:
    key: str
    title: str                    # MAINTAINERS section title
    prefix: str                   # subject prefix, e.g. "can"
    home: str                     # directory new files go to
    files: tuple[str, ...]        # initial files ("*.bin" style names are binary)
    maintainers: tuple[str, ...]
    weight: float                 # share of ordinary commits
    defect_factor: float          # multiplies the period's defect probability
    nouns: tuple[str, ...]
    starts: dt.date = dt.date(2019, 1, 1)


SUBSYSTEMS: tuple[Subsystem, ...] = (
    Subsystem("can", "CAN BUS DRIVER", "can", "drivers/can",
              ("drivers/can/can_core.c", "drivers/can/can_mailbox.c", "drivers/can/can_filter.c",
               "drivers/can/can_bitrate.c", "include/aurora/can.h", "include/aurora/can_fd.h"),
              ("tobiah",), 1.3, 1.4,
              ("mailbox", "bit timing", "error counter", "acceptance filter", "bus-off recovery",
               "FD frame", "TX queue")),
    Subsystem("adc", "ADC DRIVER", "adc", "drivers/adc",
              ("drivers/adc/adc_core.c", "drivers/adc/adc_dma.c", "drivers/adc/adc_oversample.c",
               "include/aurora/adc.h"),
              ("kaito",), 1.0, 1.1,
              ("DMA ring", "oversampling", "channel sequencer", "injected conversion",
               "reference voltage")),
    Subsystem("pwm", "PWM DRIVER", "pwm", "drivers/pwm",
              ("drivers/pwm/pwm_core.c", "drivers/pwm/pwm_deadtime.c", "include/aurora/pwm.h"),
              ("noor",), 0.8, 1.0,
              ("dead time", "center-aligned mode", "break input", "duty update", "prescaler")),
    Subsystem("hal", "HARDWARE ABSTRACTION LAYER", "hal", "hal",
              ("hal/clock.c", "hal/gpio.c", "hal/irq.c", "hal/dma.c", "hal/flash.c",
               "include/aurora/hal.h"),
              ("ines", "tobiah"), 1.2, 0.9,
              ("clock tree", "GPIO mux", "IRQ priority", "DMA channel", "flash wait states")),
    Subsystem("vendor", "HAL VENDOR IMPORTS", "hal/vendor", "hal/vendor",
              ("hal/vendor/mcu_regs.h", "hal/vendor/startup_mcu.s", "hal/vendor/LICENSE.vendor"),
              ("saoirse",), 0.15, 0.5,
              ("register header", "startup code", "vendor SDK")),
    Subsystem("sched", "RTOS SCHEDULER", "sched", "rtos/sched",
              ("rtos/sched/sched.c", "rtos/sched/tick.c", "rtos/sched/idle.c",
               "include/aurora/sched.h"),
              ("ylva",), 0.9, 1.2,
              ("run queue", "tickless idle", "priority inheritance", "time slice", "stack check")),
    Subsystem("sync", "RTOS SYNCHRONISATION", "sync", "rtos/sync",
              ("rtos/sync/mutex.c", "rtos/sync/semaphore.c", "rtos/sync/event_group.c"),
              ("ylva", "margit"), 0.6, 1.3,
              ("mutex", "counting semaphore", "event group", "timeout wait")),
    Subsystem("mqtt", "MQTT CLIENT", "mqtt", "net/mqtt",
              ("net/mqtt/client.c", "net/mqtt/packet.c", "net/mqtt/keepalive.c",
               "net/mqtt/tls_glue.c"),
              ("priya",), 0.9, 1.2,
              ("keepalive", "QoS 1 retry", "packet parser", "TLS session", "reconnect backoff"),
              starts=dt.date(2020, 3, 2)),
    Subsystem("boot", "BOOTLOADER", "boot", "boot",
              ("boot/main.c", "boot/image_check.c", "boot/swap.c", "boot/keys/dev_root_pub.der",
               "ldscripts/boot.ld", "ldscripts/app.ld"),
              ("saoirse", "ines"), 0.7, 1.0,
              ("image header", "signature check", "swap slot", "rollback counter", "linker map")),
    Subsystem("power", "POWER MANAGEMENT", "power", "power",
              ("power/pm.c", "power/brownout.c", "power/sleep.c"),
              ("desmond",), 0.7, 1.0,
              ("brownout handler", "sleep entry", "wake-up source", "supply monitor")),
    Subsystem("sensors", "SENSORS", "sensors", "sensors",
              ("sensors/encoder.c", "sensors/hall.c", "sensors/temp.c", "sensors/imu_fusion.c"),
              ("lio", "kaito"), 1.0, 1.0,
              ("encoder index", "hall sensor table", "temperature filter", "IMU alignment")),
    Subsystem("motor", "MOTOR CONTROL", "motor", "motor",
              ("motor/foc.c", "motor/svpwm.c", "motor/observer.c", "motor/current_loop.c"),
              ("ruben",), 1.2, 1.2,
              ("current loop", "field weakening", "flux observer", "SVPWM sector", "startup ramp")),
    Subsystem("docs", "DOCUMENTATION", "docs", "docs",
              ("docs/index.md", "docs/porting.md", "docs/can.md", "docs/images/board-rev-c.png"),
              ("fenna", "auden"), 0.8, 0.0,
              ("porting guide", "CAN chapter", "build instructions", "release notes")),
    Subsystem("tools", "BUILD AND TOOLS", "tools", "tools",
              ("tools/flash.py", "tools/logview.py", "tools/release.py", "Makefile",
               "cmake/toolchain.cmake"),
              ("auden",), 0.7, 0.5,
              ("flash script", "log viewer", "release script", "toolchain file", "Makefile")),
    Subsystem("calib", "CALIBRATION DATA", "calib", "tools/calib",
              ("tools/calib/gen_calib.py", "tools/calib/adc_gain_table.bin",
               "sensors/imu_calib.c"),
              ("kaito",), 0.3, 0.8,
              ("ADC gain table", "IMU calibration", "offset trim", "calibration generator")),
)
SUB = {s.key: s for s in SUBSYSTEMS}
ROOT_FILES = ("README.md", ".gitignore")

# Words for synthetic content and messages.
BUGS = ("race on shutdown", "off-by-one", "overflow at full speed", "leak on the error path",
        "wrong timeout", "NULL dereference", "stale state after reset", "sign error",
        "missing memory barrier", "deadlock with the timer ISR", "unaligned access",
        "lost interrupt")
FEATURE_VERBS = ("add {n} support", "rework {n} handling", "clean up {n}",
                 "make {n} configurable", "split {n} into helpers", "speed up {n}",
                 "rename {n} helpers", "drop unused {n} code", "add self-test for {n}",
                 "move {n} to its own file", "tighten {n} checks", "document {n} limits")
DOCS_VERBS = ("update the {n}", "fix typos in the {n}", "expand the {n}",
              "add diagrams to the {n}", "reorganise the {n}")
FIX_VERBS = ("fix {b} in {n}", "avoid {b} in {n}", "handle {n} errors correctly",
             "fix {n} after {b}", "restore {n} state on reset", "check {n} bounds")
BODY_FEATURE = ("This keeps the {n} code path shorter and easier to review.",
                "The old {n} code predates the rev C board and assumed a slower clock.",
                "Measured on the bench rig: no change in control-loop jitter.",
                "Needed for the upcoming 48 V drive variant.",
                "No functional change intended for existing boards.",
                "The {n} state now lives in one struct instead of three globals.")
BODY_FIX = ("Under load the {n} code could hit a {b} and stall the drive.",
            "Seen on the endurance rig after about 40 hours at 85 °C.",
            "The watchdog fired because {n} never returned.",
            "Reproduced with the bus load script at 1 Mbit/s.",
            "Customer field units reported a fault code pointing at {n}.")
REVERT_REASONS = ("It breaks the rev B boards, which still ship.",
                  "This caused a measurable jitter increase in the current loop.",
                  "Bisected a boot hang on the 48 V variant to this change.")
IDENT = ("state", "cfg", "regs", "ctx", "buf", "count", "flags", "mode", "limit", "period")
COMMENTS = ("keep in sync with the reference manual", "must run with interrupts masked",
            "see errata sheet item 12", "value from bench measurements",
            "cleared by hardware on read", "TODO: tune on the 48 V board")


def maintainers_text(with_mqtt: bool, switched: bool) -> str:
    """The kernel-style MAINTAINERS file (M:, L:, S:, F:, X:, N: entries)."""
    def who(key: str) -> str:
        p = PERSON[key]
        email = p.new_email if (switched and p.new_email) else p.email
        return f"M:\t{p.name} <{email}>"

    head = (
        "AURORA-FW MAINTAINERS\n=====================\n\n"
        "Descriptions of section entries:\n\n"
        "\tM: Maintainer: Full Name <address>\n"
        "\tL: Mailing list for patches\n"
        "\tS: Status (Maintained, Odd Fixes, Obsolete)\n"
        "\tF: Files and directories, with wildcard patterns.\n"
        "\t   A trailing slash includes all files and subdirectory files.\n"
        "\tX: Files and directories that are NOT maintained here, same rules as F:\n"
        "\tN: Files and directories whose path matches this regular expression\n\n"
        "Maintainers list\n----------------\n\n")
    extra_f = {
        "can": ("drivers/can/", "include/aurora/can*.h"),
        "adc": ("drivers/adc/", "include/aurora/adc.h"),
        "pwm": ("drivers/pwm/", "include/aurora/pwm.h"),
        "hal": ("hal/", "include/aurora/hal.h"),
        "vendor": ("hal/vendor/",),
        "sched": ("rtos/sched/", "include/aurora/sched.h"),
        "sync": ("rtos/sync/",),
        "mqtt": ("net/mqtt/",),
        "boot": ("boot/", "ldscripts/*.ld"),
        "power": ("power/",),
        "sensors": ("sensors/",),
        "motor": ("motor/",),
        "docs": ("docs/",),
        "tools": ("tools/", "cmake/", "Makefile"),
    }
    extra_n = {"calib": ("calib",)}
    sections: list[tuple[str, str]] = []
    for s in SUBSYSTEMS:
        if s.key == "mqtt" and not with_mqtt:
            continue
        lines = [s.title, *(who(m) for m in s.maintainers), f"L:\t{LIST_ADDRESS}",
                 "S:\tOdd Fixes" if s.key == "vendor" else "S:\tMaintained"]
        lines += [f"F:\t{f}" for f in extra_f.get(s.key, ())]
        lines += [f"N:\t{n}" for n in extra_n.get(s.key, ())]
        if s.key == "hal":
            lines.append("X:\thal/vendor/")
        sections.append((s.title, "\n".join(lines)))
    sections.sort()
    rest = "\n".join(["THE REST", who("ines"), f"L:\t{LIST_ADDRESS}", "S:\tMaintained",
                      "F:\t*", "F:\t*/"])
    return head + "\n\n".join(text for _, text in sections) + "\n\n" + rest + "\n"


def mailmap_text() -> str:
    p = PERSON["kaito"]
    return ("# Canonical names and addresses for `git log --use-mailmap`.\n"
            f"{p.name} <{p.new_email}> <{p.email}>\n")
