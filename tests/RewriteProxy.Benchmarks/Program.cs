using BenchmarkDotNet.Running;

namespace RewriteProxy.Benchmarks;

// A named class rather than top-level statements: the proxy assembly has its own top-level Program.
public static class Program
{
    /// <summary>Every benchmark class in this assembly; pick with --filter (e.g. --filter '*Embed*').</summary>
    public static void Main(string[] args) => BenchmarkSwitcher.FromAssembly(typeof(Program).Assembly).Run(args);
}
