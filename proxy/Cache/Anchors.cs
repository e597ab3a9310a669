namespace RewriteProxy.Cache;

/// <summary>
/// The anchors of one question, extracted once by <see cref="AnchorGuard.Extract"/> (for a stored question: when
/// its entry is loaded) so that comparing two questions only compares small sorted lists and sets. Immutable.
/// </summary>
public sealed class Anchors
{
    internal Anchors(
        string[] numbers, string[] units, string[] quantities, int negations, string[] identifiers,
        string[] quotes, string[] lemmas, string[] prefixNegated, HashSet<string> tokens, string text)
    {
        Numbers = numbers;
        Units = units;
        Quantities = quantities;
        Negations = negations;
        Identifiers = identifiers;
        Quotes = quotes;
        Lemmas = lemmas;
        PrefixNegated = prefixNegated;
        Tokens = tokens;
        LemmaSet = [.. lemmas];
        Text = text;
    }

    /// <summary>Every number, canonical and sorted: "1,000" and "one thousand" are "1000", "2.50" is "2.5", "third" is "3rd", "v1.2.0" is "1.2.0".</summary>
    public IReadOnlyList<string> Numbers { get; }

    /// <summary>Every unit or currency, canonical and sorted ("kilograms" is "kg", "$" is "usd", "percent" is "%").</summary>
    public IReadOnlyList<string> Units { get; }

    /// <summary>Numbers with the unit written beside them ("5 kg"), sorted.</summary>
    public IReadOnlyList<string> Quantities { get; }

    /// <summary>How many negations the question has (not, no, never, without, n't …).</summary>
    public int Negations { get; }

    /// <summary>Codes, acronyms, words with inner capitals or digits, and capitalised names, lower-case without separators ("XR-200" is "xr200").</summary>
    public IReadOnlyList<string> Identifiers { get; }

    /// <summary>Quoted strings, lower-case with single spaces.</summary>
    public IReadOnlyList<string> Quotes { get; }

    /// <summary>Lemmas of the question's words that have an antonym in the table ("excluded" gives "exclude").</summary>
    public IReadOnlyList<string> Lemmas { get; }

    /// <summary>Stems of words negated by a prefix ("unsafe" gives "safe").</summary>
    public IReadOnlyList<string> PrefixNegated { get; }

    /// <summary>Every word and code, lower-case without separators: an identifier of the other question must be among them.</summary>
    internal HashSet<string> Tokens { get; }

    internal HashSet<string> LemmaSet { get; }

    /// <summary>The question lower-case with single spaces and no quote marks: a quoted string of the other question must occur in it.</summary>
    internal string Text { get; }
}
