using System.Globalization;
using System.Text;

namespace RewriteProxy.Cache;

/// <summary>
/// The learned part of the hit decision: a logistic regression over <see cref="HitFeatures"/>, trained on the dev part of
/// the hit corpus with leave-one-domain-out cross-validation, shipped as Cache/Resources/hit-combiner.tsv. It decides
/// only what the hard rules let through. Regenerate the file with the training command written at its top
/// (HitCombinerTrainingTests); a test fails when the shipped file differs from what training gives. Immutable, thread-safe.
/// </summary>
internal sealed class HitCombiner
{
    public const string ResourceName = "RewriteProxy.Cache.hit-combiner.tsv";

    static readonly Lazy<HitCombiner> Loaded = new(LoadEmbedded, LazyThreadSafetyMode.ExecutionAndPublication);

    public static HitCombiner Default => Loaded.Value;

    public HitCombiner(double floor, double threshold, double bias, IReadOnlyList<(string Name, double Mean, double Scale, double Weight)> features)
    {
        if (!features.Select(f => f.Name).SequenceEqual(HitFeatures.Names))
            throw new FormatException($"the combiner's features ({string.Join(", ", features.Select(f => f.Name))}) are not the decision's ({string.Join(", ", HitFeatures.Names)})");
        Floor = floor;
        Threshold = threshold;
        Bias = bias;
        Features = features;
        _mean = features.Select(f => f.Mean).ToArray();
        _scale = features.Select(f => f.Scale).ToArray();
        _weight = features.Select(f => f.Weight).ToArray();
    }

    readonly double[] _mean;
    readonly double[] _scale;
    readonly double[] _weight;

    /// <summary>The least similarity it was trained on: below it nothing is served, whatever the lane's HitSimilarity.</summary>
    public double Floor { get; }

    /// <summary>Least probability that serves, chosen on the cross-validated dev predictions.</summary>
    public double Threshold { get; }

    public double Bias { get; }

    public IReadOnlyList<(string Name, double Mean, double Scale, double Weight)> Features { get; }

    /// <summary>Probability that one answer serves both questions.</summary>
    public double Probability(double[] x)
    {
        var z = Bias;
        for (var i = 0; i < x.Length; i++) z += _weight[i] * (x[i] - _mean[i]) / _scale[i];
        return 1 / (1 + Math.Exp(-z));
    }

    public static HitCombiner Parse(TextReader reader)
    {
        double? floor = null, threshold = null, bias = null;
        var features = new List<(string, double, double, double)>();
        while (reader.ReadLine() is { } line)
        {
            if (line.Length == 0 || line[0] == '#') continue;
            var f = line.Split('\t');
            switch (f)
            {
                case ["floor", var v]: floor = Number(v); break;
                case ["threshold", var v]: threshold = Number(v); break;
                case ["bias", var v]: bias = Number(v); break;
                case ["feature", var name, var mean, var scale, var weight]: features.Add((name, Number(mean), Number(scale), Number(weight))); break;
                default: throw new FormatException($"combiner line is not floor, threshold, bias or feature: '{line}'");
            }
        }
        return new HitCombiner(floor ?? throw new FormatException("combiner file has no floor"),
            threshold ?? throw new FormatException("combiner file has no threshold"), bias ?? throw new FormatException("combiner file has no bias"), features);

        static double Number(string text) => double.Parse(text, NumberStyles.Float, CultureInfo.InvariantCulture);
    }

    /// <summary>The file as training writes it: <paramref name="header"/> lines as comments, then the values with 6 significant decimals.</summary>
    public string Format(IEnumerable<string> header)
    {
        var text = new StringBuilder();
        foreach (var line in header) text.Append("# ").Append(line).Append('\n');
        text.Append(CultureInfo.InvariantCulture, $"floor\t{Floor:0.00}\nthreshold\t{Threshold:0.######}\nbias\t{Bias:0.######}\n");
        foreach (var (name, mean, scale, weight) in Features)
            text.Append(CultureInfo.InvariantCulture, $"feature\t{name}\t{mean:0.######}\t{scale:0.######}\t{weight:0.######}\n");
        return text.ToString();
    }

    static HitCombiner LoadEmbedded()
    {
        using var stream = typeof(HitCombiner).Assembly.GetManifestResourceStream(ResourceName)
            ?? throw new InvalidOperationException($"embedded resource {ResourceName} is missing from the build");
        using var reader = new StreamReader(stream);
        return Parse(reader);
    }
}
