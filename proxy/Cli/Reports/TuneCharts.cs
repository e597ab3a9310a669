using System.Globalization;
using ScottPlot;

namespace RewriteProxy.Cli.Reports;

/// <summary>The charts of a tune report, each written as PNG and SVG by ScottPlot.</summary>
public static class TuneCharts
{
    /// <summary>Pixel size of every chart: wide enough for the 0.30…0.95 ticks, and it fits a Markdown page.</summary>
    public const int Width = 900;
    public const int Height = 500;

    /// <summary>Histogram bin width: 0.025 puts two bins between neighbouring candidate thresholds (steps of 0.05).</summary>
    public const double BinWidth = 0.025;

    /// <summary>Bars are half see-through so overlapping groups stay visible.</summary>
    const double BarAlpha = 0.55;

    /// <summary>One histogram per group of <paramref name="values"/> on shared bins, with marked thresholds as vertical lines.</summary>
    public static void Histogram(string pathWithoutExtension, string title, string xLabel,
        IReadOnlyDictionary<string, IReadOnlyList<double>> values, IReadOnlyList<(double X, string Label)> marks)
    {
        var plot = new Plot();
        var all = values.Values.SelectMany(v => v).ToList();
        // Bins span the data and the marked thresholds, on multiples of the bin width.
        var span = all.Concat(marks.Select(m => m.X)).DefaultIfEmpty(0).ToList();
        var min = Math.Floor(span.Min() / BinWidth) * BinWidth;
        var max = Math.Max(min + BinWidth, Math.Ceiling(span.Max() / BinWidth) * BinWidth);
        var palette = new ScottPlot.Palettes.Category10();
        var index = 0;
        foreach (var (group, numbers) in values)
        {
            // One spare bin on top: a value on the last edge (e.g. similarity 1.0) must land in a bin, not outside.
            var bins = (int)Math.Round((max - min) / BinWidth) + 1;
            var histogram = ScottPlot.Statistics.Histogram.WithBinCount(bins, min, min + bins * BinWidth);
            histogram.AddRange(numbers);
            if (histogram.Counts.Sum() != numbers.Count)
                throw new InvalidOperationException($"histogram of {group}: {histogram.Counts.Sum()} of {numbers.Count} values fell in a bin");
            var bars = plot.Add.Histogram(histogram);
            var color = palette.GetColor(index++).WithAlpha(BarAlpha);
            foreach (var bar in bars.Bars)
            {
                bar.FillColor = color;
                bar.LineWidth = 0;
            }
            // Histogram bars carry no legend text of their own: the legend gets one swatch per group.
            plot.Legend.ManualItems.Add(new LegendItem { LabelText = $"{group} (n = {numbers.Count})", FillColor = color });
        }
        // The vertical lines bring their own legend items beside the manual swatches.
        AddMarks(plot, marks);
        plot.Title(title);
        plot.XLabel(xLabel);
        plot.YLabel("count");
        plot.Axes.Margins(bottom: 0);
        plot.Axes.SetLimitsX(min - BinWidth, max + 2 * BinWidth);
        // Drift and similarity pile up on the right half; the legend goes where the bars are fewest.
        plot.ShowLegend(values.Count > 0 && all.Count > 0 && all.Average() > (min + max) / 2 ? Alignment.UpperLeft : Alignment.UpperRight);
        Save(plot, pathWithoutExtension);
    }

    /// <summary>Named series over the candidate thresholds (e.g. precision, recall, F1), y in 0…1.</summary>
    public static void Lines(string pathWithoutExtension, string title, string xLabel, IReadOnlyList<double> xs,
        IReadOnlyList<(string Name, IReadOnlyList<double> Ys)> series, IReadOnlyList<(double X, string Label)> marks)
    {
        var plot = new Plot();
        foreach (var (name, ys) in series)
        {
            // A value that does not exist (precision with nothing dropped) is left out rather than drawn as 0.
            var points = xs.Zip(ys).Where(p => !double.IsNaN(p.Second)).ToArray();
            var line = plot.Add.Scatter(points.Select(p => p.First).ToArray(), points.Select(p => p.Second).ToArray());
            line.LegendText = name;
            line.LineWidth = 2;
            line.MarkerSize = 6;
        }
        AddMarks(plot, marks);
        plot.Title(title);
        plot.XLabel(xLabel);
        plot.YLabel("share");
        plot.Axes.SetLimitsY(0, 1.05);
        plot.ShowLegend(Alignment.LowerLeft);
        Save(plot, pathWithoutExtension);
    }

    static List<ScottPlot.Plottables.VerticalLine> AddMarks(Plot plot, IReadOnlyList<(double X, string Label)> marks)
    {
        var palette = new ScottPlot.Palettes.Dark();
        var lines = new List<ScottPlot.Plottables.VerticalLine>();
        for (var i = 0; i < marks.Count; i++)
        {
            var line = plot.Add.VerticalLine(marks[i].X);
            line.LinePattern = LinePattern.Dashed;
            line.LineWidth = 2;
            line.Color = palette.GetColor(i);
            line.LegendText = $"{marks[i].Label} {marks[i].X.ToString("0.00", CultureInfo.InvariantCulture)}";
            lines.Add(line);
        }
        return lines;
    }

    /// <summary>Debian/Ubuntu package of the fonts ScottPlot found on the machine this was measured on (DejaVu, via SkiaSharp).</summary>
    public const string FontPackage = "fonts-dejavu-core";

    /// <summary>Letters and digits every chart draws: the font must have glyphs for all of them.</summary>
    const string SampleText = "MaxDrift 0.65 count similarity";

    /// <summary>
    /// A warning when the font ScottPlot chose cannot draw plain Latin text (no fonts installed, or only symbol
    /// fonts): ScottPlot then draws every chart without any text (no title, ticks or legend labels), silently.
    /// Null when the text will show.
    /// </summary>
    /// <param name="canDraw">Whether the chart font has glyphs for a text; default asks SkiaSharp about ScottPlot's default font.</param>
    public static string? FontWarning(Func<string, bool>? canDraw = null)
    {
        canDraw ??= text =>
        {
            using var typeface = SkiaSharp.SKTypeface.FromFamilyName(Fonts.Default);
            return typeface is not null && typeface.ContainsGlyphs(text);
        };
        return canDraw(SampleText)
            ? null
            : $"no usable font ('{Fonts.Default}' cannot draw Latin text): the charts will have no text; " +
              $"install a font package (Debian/Ubuntu: apt-get install {FontPackage})";
    }

    static void Save(Plot plot, string pathWithoutExtension)
    {
        plot.SavePng(pathWithoutExtension + ".png", Width, Height);
        plot.SaveSvg(pathWithoutExtension + ".svg", Width, Height);
    }
}
