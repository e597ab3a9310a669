using System.Text;
using Spectre.Console;
using Spectre.Console.Rendering;

namespace RewriteProxy.Cli.Reports;

/// <summary>A small table of already formatted cells that prints as Markdown, CSV or a console table, so all three agree.</summary>
public sealed class ReportTable(string title, params string[] headers)
{
    readonly List<string[]> _rows = [];

    public string Title { get; } = title;
    public IReadOnlyList<string> Headers { get; } = headers;
    public IReadOnlyList<IReadOnlyList<string>> Rows => _rows;

    public ReportTable Add(params string[] cells)
    {
        if (cells.Length != Headers.Count) throw new ArgumentException($"{cells.Length} cells for {Headers.Count} columns");
        _rows.Add(cells);
        return this;
    }

    /// <summary>A GitHub-flavoured Markdown table; numeric columns right-aligned. Pipes in cells are escaped.</summary>
    public string ToMarkdown()
    {
        var sb = new StringBuilder();
        sb.Append("| ").AppendJoin(" | ", Headers.Select(Escape)).AppendLine(" |");
        sb.Append('|').AppendJoin('|', Headers.Select((_, i) => IsNumeric(i) ? " ---: " : " --- ")).AppendLine("|");
        foreach (var row in _rows) sb.Append("| ").AppendJoin(" | ", row.Select(Escape)).AppendLine(" |");
        return sb.ToString();

        static string Escape(string cell) => cell.Replace("|", "\\|").Replace("\n", " ");
    }

    /// <summary>CSV as RFC 4180 describes it: comma-separated, CRLF line ends, fields with comma, quote or line break quoted.</summary>
    public string ToCsv()
    {
        var sb = new StringBuilder();
        sb.AppendJoin(',', Headers.Select(Quote)).Append("\r\n");
        foreach (var row in _rows) sb.AppendJoin(',', row.Select(Quote)).Append("\r\n");
        return sb.ToString();

        static string Quote(string cell) =>
            cell.IndexOfAny([',', '"', '\r', '\n']) >= 0 ? "\"" + cell.Replace("\"", "\"\"") + "\"" : cell;
    }

    public Table ToConsole()
    {
        var table = new Table { Title = new TableTitle(Markup.Escape(Title)), Border = TableBorder.Simple };
        for (var i = 0; i < Headers.Count; i++)
            table.AddColumn(new TableColumn(new Text(Headers[i])) { Alignment = IsNumeric(i) ? Justify.Right : Justify.Left });
        foreach (var row in _rows) table.AddRow(row.Select(c => (IRenderable)new Text(c)));
        return table;
    }

    /// <summary>A column is numeric when every filled cell starts like a number (or is the "—" of a value that does not exist).</summary>
    bool IsNumeric(int column) => _rows.Count > 0 && _rows.All(r =>
        r[column] is "—" or "" || char.IsDigit(r[column][0]) || r[column][0] is '-' or '.');

    public void WriteFiles(string directory, string baseName)
    {
        File.WriteAllText(Path.Combine(directory, baseName + ".md"), $"### {Title}\n\n{ToMarkdown()}");
        File.WriteAllText(Path.Combine(directory, baseName + ".csv"), ToCsv());
    }
}
