using System.Collections.Frozen;

namespace RewriteProxy.Cache;

/// <summary>
/// The fixed word lists of the anchor guard: negations, written-out numbers, ordinals and units. English only,
/// like the reference encoder (all-MiniLM-L6-v2 is trained on English text).
/// </summary>
internal static class AnchorLexicon
{
    /// <summary>Words that negate; n't contractions are counted separately. "no" before a number ("No. 5") is not one.</summary>
    public static readonly FrozenSet<string> Negations = FrozenSet.ToFrozenSet(
    [
        "not", "no", "never", "without", "except", "none", "nobody", "nothing", "neither", "nor", "nowhere",
        "cannot", "noone",
    ], StringComparer.Ordinal);

    /// <summary>Cardinal words below a hundred.</summary>
    public static readonly FrozenDictionary<string, int> Cardinals = new Dictionary<string, int>(StringComparer.Ordinal)
    {
        ["zero"] = 0, ["one"] = 1, ["two"] = 2, ["three"] = 3, ["four"] = 4, ["five"] = 5, ["six"] = 6,
        ["seven"] = 7, ["eight"] = 8, ["nine"] = 9, ["ten"] = 10, ["eleven"] = 11, ["twelve"] = 12,
        ["thirteen"] = 13, ["fourteen"] = 14, ["fifteen"] = 15, ["sixteen"] = 16, ["seventeen"] = 17,
        ["eighteen"] = 18, ["nineteen"] = 19, ["twenty"] = 20, ["thirty"] = 30, ["forty"] = 40, ["fifty"] = 50,
        ["sixty"] = 60, ["seventy"] = 70, ["eighty"] = 80, ["ninety"] = 90,
    }.ToFrozenDictionary(StringComparer.Ordinal);

    /// <summary>Words that multiply what stands before them ("two hundred", "1.5 million", "a dozen").</summary>
    public static readonly FrozenDictionary<string, long> Multipliers = new Dictionary<string, long>(StringComparer.Ordinal)
    {
        ["dozen"] = 12, ["hundred"] = 100, ["thousand"] = 1_000, ["million"] = 1_000_000, ["billion"] = 1_000_000_000,
    }.ToFrozenDictionary(StringComparer.Ordinal);

    /// <summary>Ordinal words; "second" after a number is the unit instead.</summary>
    public static readonly FrozenDictionary<string, int> Ordinals = new Dictionary<string, int>(StringComparer.Ordinal)
    {
        ["first"] = 1, ["second"] = 2, ["third"] = 3, ["fourth"] = 4, ["fifth"] = 5, ["sixth"] = 6, ["seventh"] = 7,
        ["eighth"] = 8, ["ninth"] = 9, ["tenth"] = 10, ["eleventh"] = 11, ["twelfth"] = 12, ["thirteenth"] = 13,
        ["fourteenth"] = 14, ["fifteenth"] = 15, ["sixteenth"] = 16, ["seventeenth"] = 17, ["eighteenth"] = 18,
        ["nineteenth"] = 19, ["twentieth"] = 20, ["thirtieth"] = 30, ["fortieth"] = 40, ["fiftieth"] = 50,
        ["sixtieth"] = 60, ["seventieth"] = 70, ["eightieth"] = 80, ["ninetieth"] = 90, ["hundredth"] = 100,
        ["thousandth"] = 1000,
    }.ToFrozenDictionary(StringComparer.Ordinal);

    /// <summary>
    /// Words before which "one" is a pronoun, not a count ("which one", "the one", "no one"): counting it would
    /// refuse "Which one is open?" against "Which is open?".
    /// </summary>
    public static readonly FrozenSet<string> PronounOneBefore = FrozenSet.ToFrozenSet(
    [
        "which", "this", "that", "each", "every", "any", "the", "another", "no", "some", "a", "an", "little",
        "someone", "anyone", "everyone",
    ], StringComparer.Ordinal);

    /// <summary>
    /// Words after which "one" stands for a thing already named, not a count ("rent one at reception", "the second one
    /// paid", "one or two" aside): prepositions, conjunctions and verbs of being. Read from the dev part of the hit corpus.
    /// </summary>
    public static readonly FrozenSet<string> PronounOneAfter = FrozenSet.ToFrozenSet(
    [
        "another", "at", "in", "on", "of", "for", "from", "to", "with", "by", "if", "is", "are", "was", "were", "be", "paid",
        "that", "which", "who", "instead", "too", "as", "when", "before", "after",
    ], StringComparer.Ordinal);

    /// <summary>Currency symbols: they name the unit of the number after them.</summary>
    public static readonly FrozenDictionary<char, string> CurrencySymbols = new Dictionary<char, string>
    {
        ['$'] = "usd", ['€'] = "eur", ['£'] = "gbp", ['¥'] = "jpy",
    }.ToFrozenDictionary();

    /// <summary>
    /// Unit words after a number (lower-cased) and their canonical name. "pounds" is taken as weight; "in" is left
    /// out, since "bus 5 in service" is far more common than inches written as "in".
    /// </summary>
    public static readonly FrozenDictionary<string, string> BoundUnits = Units(
        ("%", "percent", "pct"),
        ("kg", "kgs", "kilo", "kilos", "kilogram", "kilograms", "kilogramme", "kilogrammes"),
        ("g", "gram", "grams", "gramme", "grammes"),
        ("mg", "milligram", "milligrams"),
        ("lb", "lbs", "pound", "pounds"),
        ("oz", "ounce", "ounces"),
        ("t", "tonne", "tonnes", "ton", "tons"),
        ("km", "kilometre", "kilometres", "kilometer", "kilometers"),
        ("m", "metre", "metres", "meter", "meters"),
        ("cm", "centimetre", "centimetres", "centimeter", "centimeters"),
        ("mm", "millimetre", "millimetres", "millimeter", "millimeters"),
        ("mi", "mile", "miles"),
        ("ft", "foot", "feet"),
        ("inch", "inches"),
        ("yd", "yard", "yards"),
        ("l", "litre", "litres", "liter", "liters"),
        ("ml", "millilitre", "millilitres", "milliliter", "milliliters"),
        ("gal", "gallon", "gallons"),
        ("mph"),
        ("m/s"),
        ("km/h", "kmh", "kph"),
        ("ms", "millisecond", "milliseconds"),
        ("s", "sec", "secs", "second", "seconds"),
        ("min", "mins", "minute", "minutes"),
        ("h", "hr", "hrs", "hour", "hours"),
        ("d", "day", "days"),
        ("wk", "wks", "week", "weeks"),
        ("mo", "month", "months"),
        ("yr", "yrs", "year", "years"),
        ("am", "a.m"),
        ("pm", "p.m"),
        ("°c", "celsius", "c"),
        ("°f", "fahrenheit", "f"),
        ("°", "degree", "degrees"),
        ("kb", "kilobyte", "kilobytes"),
        ("mb", "megabyte", "megabytes"),
        ("gb", "gigabyte", "gigabytes"),
        ("tb", "terabyte", "terabytes"),
        ("w", "watt", "watts"),
        ("kw", "kilowatt", "kilowatts"),
        ("mw", "megawatt", "megawatts"),
        ("kwh"),
        ("mwh"),
        ("v", "volt", "volts"),
        ("hz", "hertz"),
        ("khz"),
        ("mhz"),
        ("ghz"),
        ("psi"),
        ("bar"),
        ("kpa"),
        ("rpm"),
        ("usd", "dollar", "dollars"),
        ("eur", "euro", "euros"),
        ("gbp"),
        ("jpy", "yen"),
        ("chf", "franc", "francs"),
        ("cent", "cents"));

    /// <summary>
    /// Unit spellings that name a unit even with no number beside them ("How many kg …"): symbols, case-sensitive
    /// abbreviations and measure words that are not also everyday words (time words like "hours" are left out:
    /// "opening hours" carries no amount).
    /// </summary>
    public static readonly FrozenDictionary<string, string> FreeUnits = new Dictionary<string, string>(StringComparer.Ordinal)
    {
        ["%"] = "%", ["percent"] = "%", ["kg"] = "kg", ["km"] = "km", ["mph"] = "mph", ["km/h"] = "km/h",
        ["kWh"] = "kwh", ["MWh"] = "mwh", ["kW"] = "kw", ["MW"] = "mw", ["GB"] = "gb", ["MB"] = "mb", ["TB"] = "tb",
        ["kB"] = "kb", ["GHz"] = "ghz", ["MHz"] = "mhz", ["psi"] = "psi", ["rpm"] = "rpm", ["USD"] = "usd",
        ["EUR"] = "eur", ["GBP"] = "gbp", ["JPY"] = "jpy", ["CHF"] = "chf", ["ms"] = "ms", ["mm"] = "mm",
        ["cm"] = "cm", ["ml"] = "ml", ["mg"] = "mg", ["lbs"] = "lb",
        ["kilograms"] = "kg", ["kilometres"] = "km", ["kilometers"] = "km", ["miles"] = "mi", ["pounds"] = "lb",
        ["litres"] = "l", ["liters"] = "l", ["gallons"] = "gal", ["metres"] = "m", ["meters"] = "m",
        ["feet"] = "ft", ["inches"] = "inch", ["dollars"] = "usd", ["euros"] = "eur", ["celsius"] = "°c",
        ["fahrenheit"] = "°f", ["megabytes"] = "mb", ["gigabytes"] = "gb", ["kilowatts"] = "kw",
    }.ToFrozenDictionary(StringComparer.Ordinal);

    static FrozenDictionary<string, string> Units(params object[] groups)
    {
        var map = new Dictionary<string, string>(StringComparer.Ordinal);
        foreach (var group in groups)
        {
            var names = group switch
            {
                string single => [single],
                System.Runtime.CompilerServices.ITuple tuple => Enumerable.Range(0, tuple.Length).Select(i => (string)tuple[i]!).ToArray(),
                _ => throw new ArgumentException("unit group"),
            };
            foreach (var name in names) map[name] = names[0];
        }
        return map.ToFrozenDictionary(StringComparer.Ordinal);
    }
}
