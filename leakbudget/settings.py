"""The optional Settings sheet: supply defaults, the budget rule's fraction, the catalogue basis, and so on.

Each setting has a default with its source; the results say which settings came from the workbook and which
defaults were used.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from leakbudget.devices import BUDGET_FRACTION_DEFAULT, BUDGET_OF, TRIP_LEVEL
from leakbudget.input.schema import normalise
from leakbudget.input.units import UnitProblem, to_unit, unit_factor
from leakbudget.provenance import Kind, Source

# Default supplies by market, used when neither the circuit nor the Settings sheet gives one.
US_SUPPLY = (120.0, 60.0)  # NEC nominal 120 V, 60 Hz (common practice for US dwellings)
IEC_SUPPLY = (230.0, 50.0)  # IEC 60038 nominal 230 V, 50 Hz
SUPPLY_SOURCES = {
    "us": Source.common_practice("US dwelling supply 120 V 60 Hz"),
    "iec": Source.published("IEC 60038 nominal 230 V 50 Hz"),
}
# A line-to-line appliance is not symmetric (single-pole switched elements, damp end seals): the share of its
# leakage on its first line. From memory; no published figure.
LINE_IMBALANCE_DEFAULT = 0.6
LINE_IMBALANCE_SOURCE = Source.from_memory(
    "60 % of a line-to-line appliance's leakage on one line, 40 % on the other (single-pole switched elements, "
    "damp end seals)"
)
# A circuit within budget whose switch-on trip likelihood is above this is "marginal" (a modelling choice: 1 %, one
# trip in a hundred cold starts, is where a user starts to notice).
SWITCH_ON_LIMIT_DEFAULT = 0.01
SWITCH_ON_LIMIT_SOURCE = Source(
    Kind.DEFAULT, "modelling choice: 1 % switch-on trip likelihood, above which a circuit within budget is marginal"
)
LOAD_FACTOR_DEFAULT = 0.8  # continuous load at 80 % of rating, common practice (cf. NEC 210.19/210.20)
# How `split` judges a circuit's current (leakbudget.planner.current): "diversity" (the largest load in full, the
# others at the Diversity share), "all-on" (every load at once within rating × Load factor) or "strict" (all-on, and
# a limit no plan can meet makes the plan fail). Limits the loads that must stay break are warnings unless strict.
CURRENT_RULES = ("diversity", "all-on", "strict")
CURRENT_RULE_DEFAULT = "diversity"
DIVERSITY_DEFAULT = 0.4
DIVERSITY_SOURCE = Source.common_practice(
    "the largest load in full and 40 % of the others, in the manner of the diversity allowances designers use for "
    "final circuits (figure from memory)"
)
BY_DEVICE = "by device: 120 V 60 Hz for UL devices (common practice), 230 V 50 Hz for RCDs (IEC 60038)"


# The wiring codes `leakbudget review` knows, by key; leakbudget.compliance.codes defines each (and checks it defines
# exactly these). Named here so the Code setting is refused at reading time, like every other setting.
CODE_KEYS = ("nec-2020", "nec-2023", "iec-60364", "bs-7671")
OCCUPANCIES = ("dwelling", "other")  # the review's rules for dwellings (NEC 210.8(A)) or other occupancies (210.8(B))

# --- The trip-likelihood model's settings (leakbudget.risk), each default with its source ---------------------------------------------------------------------
METER_ACCURACY_DEFAULT = 0.05
METER_ACCURACY_SOURCE = Source.from_memory("±5 % of reading, a usual leakage-clamp accuracy on milliamp ranges")
COMPONENT_TOLERANCE_DEFAULT = 0.20
COMPONENT_TOLERANCE_SOURCE = Source.common_practice(
    "±20 % (tolerance letter M of IEC 60062), the usual tolerance of Y-capacitors"
)
UPPER_PERCENTILE_DEFAULT = 0.95
UPPER_PERCENTILE_SOURCE = Source(
    Kind.DEFAULT, "modelling choice: a from-memory catalogue upper value as the 95th percentile"
)
# The two-level spread of catalogue values (geometric standard deviations): between models and batches of one kind
# of appliance, and between units of one model. From memory; no published survey fixes them.
MODEL_SPREAD_DEFAULT = 1.6
MODEL_SPREAD_SOURCE = Source.from_memory(
    "geometric standard deviation 1.6 of one kind's leakage between models and batches"
)
UNIT_SPREAD_DEFAULT = 1.15
UNIT_SPREAD_SOURCE = Source.from_memory("geometric standard deviation 1.15 between units of one model")
SWITCH_ON_FACTOR_DEFAULT = 3.0
SWITCH_ON_FACTOR_SOURCE = Source.from_memory(
    "a damp heating element leaks about 3 × its dry value at switch-on; published guidance says only 'several times'"
)
SEED_DEFAULT = 1
SEED_SOURCE = Source(Kind.DEFAULT, "default seed 1")
SAMPLES_SOURCE = Source(Kind.DEFAULT, "auto: 10,000 samples, fewer (at least 1,000) for very large workbooks")

SAMPLES_LIMIT = 1_000_000  # the largest count the Samples setting accepts


# --- Parsers ------------------------------------------------------------------------------
def _shown(value: Any) -> str:
    """A cell value as the user typed it (a whole float without its '.0')."""
    return str(int(value)) if isinstance(value, float) and value.is_integer() else str(value)


def parse_percentile(value: Any) -> float:
    """A percentile as a fraction strictly between 0.5 and 1 ('95 %' or 0.95)."""
    result = to_unit(value, "dimensionless", percent=True)
    if not 0.5 < result < 1.0:
        raise UnitProblem(f"'{_shown(value)}' is not a percentile between 50 % and 100 % (type 95 % or 0.95)")
    return result


def parse_factor(value: Any) -> float:
    """A multiplier of at least 1."""
    result = to_unit(value, "dimensionless")
    if result < 1.0:
        raise UnitProblem(f"'{_shown(value)}' is below 1 (a switch-on factor multiplies the dry leakage)")
    return result


def parse_samples(value: Any) -> int | None:
    """'auto' (None) or a whole number of samples from 100 to 1,000,000."""
    if str(value).strip().lower() == "auto":
        return None
    result = to_unit(value, "dimensionless")
    if not float(result).is_integer() or not 100 <= result <= SAMPLES_LIMIT:
        raise UnitProblem(f"'{_shown(value)}' is not auto or a whole number from 100 to {SAMPLES_LIMIT:,}")
    return int(result)


def parse_seed(value: Any) -> int:
    """A whole number from 0 upwards."""
    result = to_unit(value, "dimensionless")
    if not float(result).is_integer() or result < 0:
        raise UnitProblem(f"'{_shown(value)}' is not a whole number of 0 or more")
    return int(result)


def parse_line_share(value: Any) -> float:
    """A share of a line-to-line load's leakage on its first line, from 50 % (symmetric) to 100 %."""
    result = to_unit(value, "dimensionless", percent=True)
    if not 0.5 <= result <= 1.0:
        raise UnitProblem(f"'{_shown(value)}' is not a share between 50 % and 100 % (type 60 % or 0.6)")
    return result


def _fraction(value: Any) -> float:
    result = to_unit(value, "dimensionless", percent=True)
    if not 0.0 < result <= 1.0:
        raise UnitProblem(f"'{value}' is not a fraction between 0 and 1 (type 0.30 or 30 %)")
    return result


def parse_likelihood_cap(value: Any) -> float:
    """A trip-likelihood cap: a fraction or percentage in (0, 1] ("1 %", 0.01)."""
    return _fraction(value)


def _choice(*allowed: str) -> Callable[[Any], str]:
    def parse(value: Any) -> str:
        text = str(value).strip().lower()
        if text not in allowed:
            raise UnitProblem(f"'{value}' is not one of {', '.join(allowed)}")
        return text

    return parse


def _positive(unit: str) -> Callable[[Any], float]:
    def parse(value: Any) -> float:
        result = to_unit(value, unit)
        if result <= 0:
            raise UnitProblem(f"'{value}' must be greater than zero")
        return result

    return parse


def _length_unit(value: Any) -> str:
    """A unit of length, by name (m, ft, feet, …): looked up, never evaluated."""
    text = str(value).strip()
    try:
        unit_factor(text, "m")
    except UnitProblem as exc:
        case = exc.hint if exc.hint and exc.hint.startswith("units are case-sensitive") else None
        raise UnitProblem(f"'{_shown(value)}' is not a unit of length", case or "type m or ft") from None
    return text


def _text(value: Any) -> str:
    return str(value).strip().lower()


def _free_text(value: Any) -> str:
    return " ".join(str(value).split())


@dataclass(frozen=True, slots=True)
class SettingSpec:
    name: str
    parse: Callable[[Any], Any]
    default: Any
    default_source: Source
    help: str


SETTING_SPECS: tuple[SettingSpec, ...] = (
    SettingSpec(
        "Voltage",
        _positive("V"),
        None,
        Source(Kind.DEFAULT, BY_DEVICE),
        "Supply line-to-neutral voltage for circuits that give none (default by device: 120 V for UL "
        "devices, 230 V for RCDs).",
    ),
    SettingSpec(
        "Frequency",
        _positive("Hz"),
        None,
        Source(Kind.DEFAULT, BY_DEVICE),
        "Supply frequency for circuits that give none (default 60 Hz for UL devices, 50 Hz for RCDs).",
    ),
    SettingSpec(
        "Budget fraction",
        _fraction,
        BUDGET_FRACTION_DEFAULT,
        Source.published("BS 7671:2018 reg. 531.3.2"),
        "Share of the trip level standing leakage may use (default 0.30).",
    ),
    SettingSpec(
        "Budget of",
        _choice(*BUDGET_OF),
        TRIP_LEVEL,
        Source(Kind.DEFAULT, "default: the trip level, as BS 7671:2018 reg. 531.3.2 (30 % of IΔn)"),
        "What the budget fraction is a share of: trip level (default) or no-trip level (e.g. 0.45 × 4 mA = 1.8 mA "
        "for a Class A GFCI).",
    ),
    SettingSpec(
        "Basis",
        _choice("typical", "upper"),
        "typical",
        Source(Kind.DEFAULT, "default"),
        "Which catalogue value to use: typical or upper.",
    ),
    SettingSpec(
        "Sum",
        _choice("arithmetic", "phasor"),
        "arithmetic",
        Source(Kind.DEFAULT, "default (the conservative figure)"),
        "Which per-circuit sum gates the budget: arithmetic (conservative) or phasor.",
    ),
    SettingSpec(
        "Switch-on limit",
        _fraction,
        SWITCH_ON_LIMIT_DEFAULT,
        SWITCH_ON_LIMIT_SOURCE,
        "A circuit within budget whose switch-on trip likelihood is above this is 'marginal' (default 1 %).",
    ),
    SettingSpec(
        "Line imbalance",
        parse_line_share,
        LINE_IMBALANCE_DEFAULT,
        LINE_IMBALANCE_SOURCE,
        "Share of a line-to-line load's leakage on its first line (default 60 %; 50 % is perfectly symmetric).",
    ),
    SettingSpec(
        "Length unit",
        _length_unit,
        "m",
        Source(Kind.DEFAULT, "default"),
        "Unit of bare numbers in the Cable length column (m or ft).",
    ),
    SettingSpec(
        "Default cable",
        _text,
        "generic",
        Source(Kind.DEFAULT, "default"),
        "Cable catalogue key for circuits whose Cable cell is blank.",
    ),
    SettingSpec(
        "Load factor",
        _fraction,
        LOAD_FACTOR_DEFAULT,
        Source.common_practice("80 % of rating for continuous load"),
        "Share of a circuit's rating the split planner may load it to (default 0.8).",
    ),
    SettingSpec(
        "Current rule",
        _choice(*CURRENT_RULES),
        CURRENT_RULE_DEFAULT,
        Source.common_practice("diversity: the largest load in full, the others at the Diversity share"),
        "How `leakbudget split` judges a circuit's current: diversity (default: the largest load in full, the others "
        "at the Diversity share, within the rating), all-on (every load at once within rating × Load factor) or "
        "strict (all-on, and a current limit no plan can meet fails the plan, exit 1).",
    ),
    SettingSpec(
        "Diversity",
        _fraction,
        DIVERSITY_DEFAULT,
        DIVERSITY_SOURCE,
        "Share of every load but the largest that counts towards a circuit's current under the diversity rule "
        "(default 0.4).",
    ),
    SettingSpec(
        "Max trip likelihood",
        _fraction,
        None,
        Source(Kind.DEFAULT, "no limit"),
        "Highest switch-on trip likelihood `leakbudget split` may leave on a protected circuit, e.g. 1 % "
        "(blank: no limit; --max-trip-likelihood overrides it).",
    ),
    SettingSpec(
        "Code",
        _choice(*CODE_KEYS),
        None,
        Source(Kind.DEFAULT, "default by supply frequency"),
        f"Wiring code `leakbudget review` checks against: {', '.join(CODE_KEYS)} (default nec-2023 for a "
        "60 Hz plan, iec-60364 for a 50 Hz plan).",
    ),
    SettingSpec(
        "Occupancy",
        _choice(*OCCUPANCIES),
        "dwelling",
        Source(Kind.DEFAULT, "a dwelling unless set"),
        "What the premises are for `leakbudget review`: dwelling (default) or other (a shop, an office, a commercial "
        "kitchen: NEC 210.8(B) instead of 210.8(A); no dwelling-only rules).",
    ),
    SettingSpec(
        "Meter accuracy",
        _fraction,
        METER_ACCURACY_DEFAULT,
        METER_ACCURACY_SOURCE,
        "± accuracy of your leakage clamp as a share of the reading (default 5 %).",
    ),
    SettingSpec(
        "Component tolerance",
        _fraction,
        COMPONENT_TOLERANCE_DEFAULT,
        COMPONENT_TOLERANCE_SOURCE,
        "± tolerance of Y capacitance, insulation resistance and cable figures (default 20 %).",
    ),
    SettingSpec(
        "Upper percentile",
        parse_percentile,
        UPPER_PERCENTILE_DEFAULT,
        UPPER_PERCENTILE_SOURCE,
        "Percentile the catalogue upper value stands for in the trip likelihood (default 95 %).",
    ),
    SettingSpec(
        "Model spread",
        parse_factor,
        MODEL_SPREAD_DEFAULT,
        MODEL_SPREAD_SOURCE,
        "Geometric standard deviation of a catalogue value between models of one kind (default 1.6); the units "
        "of one Loads row share one model.",
    ),
    SettingSpec(
        "Unit spread",
        parse_factor,
        UNIT_SPREAD_DEFAULT,
        UNIT_SPREAD_SOURCE,
        "Geometric standard deviation between units of one model (default 1.15).",
    ),
    SettingSpec(
        "Switch-on factor",
        parse_factor,
        SWITCH_ON_FACTOR_DEFAULT,
        SWITCH_ON_FACTOR_SOURCE,
        "Leakage of a heating element at switch-on after idle, as a multiple of its dry value (default 3).",
    ),
    SettingSpec(
        "Samples",
        parse_samples,
        None,
        SAMPLES_SOURCE,
        "Monte Carlo samples for the trip likelihood: auto (default) or a whole number.",
    ),
    SettingSpec(
        "Seed",
        parse_seed,
        SEED_DEFAULT,
        SEED_SOURCE,
        "Seed of the random numbers; the same workbook and seed give the same likelihoods.",
    ),
    # Job details, shown at the head of `leakbudget report`; free text, case kept.
    SettingSpec(
        "Job",
        _free_text,
        None,
        Source(Kind.DEFAULT, "not given"),
        "What the job is, e.g. 'Kitchen and laundry remodel'; heads the report.",
    ),
    SettingSpec("Site", _free_text, None, Source(Kind.DEFAULT, "not given"), "Address or location of the job."),
    SettingSpec("Client", _free_text, None, Source(Kind.DEFAULT, "not given"), "Who the report is for."),
    SettingSpec(
        "Prepared by", _free_text, None, Source(Kind.DEFAULT, "not given"), "Who prepared the plan and the report."
    ),
)
JOB_SETTINGS = ("Job", "Site", "Client", "Prepared by")
SPECS_BY_NAME = {normalise(s.name): s for s in SETTING_SPECS}


@dataclass
class Settings:
    """Parsed settings; ``sources`` says for each setting where its value came from."""

    values: dict[str, Any] = field(default_factory=lambda: {s.name: s.default for s in SETTING_SPECS})
    sources: dict[str, Source] = field(default_factory=lambda: {s.name: s.default_source for s in SETTING_SPECS})
    from_user: set[str] = field(default_factory=set)
    extra: dict[str, Any] = field(default_factory=dict)  # settings later features read (normalised name → raw)
    broken: set[str] = field(default_factory=set)  # settings whose cell had a problem (their default stays)

    def __getitem__(self, name: str) -> Any:
        return self.values[name]

    @property
    def budget_fraction(self) -> float:
        return float(self.values["Budget fraction"])

    @property
    def budget_of(self) -> str:
        return str(self.values["Budget of"])

    @property
    def basis(self) -> str:
        return str(self.values["Basis"])

    @property
    def sum_rule(self) -> str:
        return str(self.values["Sum"])

    @property
    def length_unit(self) -> str:
        return str(self.values["Length unit"])

    def set(self, name: str, raw: Any, where: str) -> None:
        spec = SPECS_BY_NAME[normalise(name)]
        self.values[spec.name] = spec.parse(raw)
        self.sources[spec.name] = Source(Kind.USER, f"Settings sheet, {where}")
        self.from_user.add(spec.name)
