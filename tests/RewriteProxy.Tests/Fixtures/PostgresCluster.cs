using System.Diagnostics;
using System.Security.Cryptography;
using Npgsql;

namespace RewriteProxy.Tests.Fixtures;

/// <summary>
/// A throwaway PostgreSQL cluster from Debian's <c>postgresql</c> package: <c>initdb</c> and <c>pg_ctl</c> run as the
/// <c>postgres</c> user (the tests run as root; <c>runuser</c>, as there is no sudo), the data folder and the Unix
/// socket in a fresh temporary folder, listening on 127.0.0.1 on a free port. Tests connect over TCP as the role
/// <see cref="Role"/> with a password (scram-sha-256), as a proxy would; the fixture itself uses the socket as the
/// superuser. Stopped (<c>pg_ctl stop -m immediate</c>) and removed on dispose. Missing binaries fail the tests with
/// how to get them (scripts/test.sh installs the package), never a skip.
/// </summary>
public sealed class PostgresCluster : IAsyncLifetime
{
    /// <summary>The login role the stores under test connect as; it owns every database made by <see cref="CreateDatabaseAsync"/>.</summary>
    public const string Role = "rewriteproxy";

    const string InstallHint =
        "Run scripts/test.sh, which installs Debian's 'postgresql' package (or: apt-get update && apt-get install -y postgresql).";

    /// <summary>Longest wait for the server to start or stop (pg_ctl -t); it starts in well under a second here.</summary>
    static readonly TimeSpan ServerWait = TimeSpan.FromSeconds(60);

    string _folder = "";
    string _data = "";
    string _bin = "";

    /// <summary>The role's password: random per cluster, so a test can look for it where it must never appear.</summary>
    public string Password { get; } = Convert.ToHexString(RandomNumberGenerator.GetBytes(16)).ToLowerInvariant();

    public int Port { get; private set; }

    /// <summary>Whether the server runs now (false between <see cref="StopAsync"/> and <see cref="StartAsync"/>).</summary>
    public bool Running { get; private set; }

    /// <summary>The server's log so far, for failure messages.</summary>
    public string Log => File.Exists(LogPath) ? File.ReadAllText(LogPath) : "";

    string LogPath => Path.Combine(_folder, "server.log");

    string SocketFolder => Path.Combine(_folder, "run");

    public async Task InitializeAsync()
    {
        _bin = FindBinaries();
        _folder = Directory.CreateTempSubdirectory("rewriteproxy-pg-").FullName;
        _data = Path.Combine(_folder, "data");
        Directory.CreateDirectory(SocketFolder);
        Run("chown", ["-R", "postgres:postgres", _folder]);
        RunAsPostgres("initdb", ["-D", _data, "-U", "postgres", "--auth-local=trust", "--auth-host=scram-sha-256", "-E", "UTF8", "--no-locale"]);
        await StartOnFreePortAsync();
        await using var admin = await AdminAsync("postgres");
        await using var create = new NpgsqlCommand($"CREATE ROLE {Role} LOGIN PASSWORD '{Password}'", admin);
        await create.ExecuteNonQueryAsync();
    }

    /// <summary>The connection string of a database for the role, over TCP with the password (as Store:ConnectionString takes it).</summary>
    public string ConnectionString(string database) => new NpgsqlConnectionStringBuilder
    {
        Host = "127.0.0.1",
        Port = Port,
        Database = database,
        Username = Role,
        Password = Password,
    }.ConnectionString;

    /// <summary>A new empty database owned by <see cref="Role"/>; returns its connection string. Cheap enough for one per test.</summary>
    public async Task<string> CreateDatabaseAsync()
    {
        var name = "t_" + Guid.NewGuid().ToString("N");
        await using var admin = await AdminAsync("postgres");
        await using var create = new NpgsqlCommand($"CREATE DATABASE {name} OWNER {Role}", admin);
        await create.ExecuteNonQueryAsync();
        return ConnectionString(name);
    }

    /// <summary>A superuser connection over the Unix socket (no pooling: it survives a stop and start of the server).</summary>
    public async Task<NpgsqlConnection> AdminAsync(string database)
    {
        var connection = new NpgsqlConnection(new NpgsqlConnectionStringBuilder
        {
            Host = SocketFolder,
            Port = Port,
            Database = database,
            Username = "postgres",
            Pooling = false,
        }.ConnectionString);
        await connection.OpenAsync();
        return connection;
    }

    /// <summary>Stops the server at once (clients see their connections drop), for fail-open tests.</summary>
    public Task StopAsync()
    {
        RunAsPostgres("pg_ctl", ["-D", _data, "-w", "-t", ((int)ServerWait.TotalSeconds).ToString(), "stop", "-m", "immediate"]);
        Running = false;
        return Task.CompletedTask;
    }

    /// <summary>Starts the server again on the same port and data.</summary>
    public Task StartAsync()
    {
        var (exit, output) = StartServer();
        if (exit != 0) throw new InvalidOperationException($"pg_ctl start on port {Port} failed ({exit}): {output}\n{Log}");
        Running = true;
        return Task.CompletedTask;
    }

    /// <summary>
    /// Freezes the server and its backends (SIGSTOP, by the PIDs in postmaster.pid and /proc): connections stay open
    /// and nothing answers, as with a database that hangs. <see cref="Thaw"/> lets it go on.
    /// </summary>
    public void Freeze() => Signal("-STOP");

    public void Thaw() => Signal("-CONT");

    void Signal(string signal)
    {
        var postmaster = int.Parse(File.ReadLines(Path.Combine(_data, "postmaster.pid")).First());
        var children = File.ReadAllText($"/proc/{postmaster}/task/{postmaster}/children")
            .Split(' ', StringSplitOptions.RemoveEmptyEntries);
        Run("kill", [signal, postmaster.ToString()]);
        foreach (var child in children)
        {
            // A backend that exited between the listing and the signal is no failure; any other refusal is.
            var (exit, output) = Execute("kill", [signal, child]);
            if (exit != 0 && Directory.Exists($"/proc/{child}"))
                throw new InvalidOperationException($"kill {signal} {child} failed ({exit}): {output}");
        }
    }

    async Task StartOnFreePortAsync()
    {
        var output = "";
        for (var attempt = 0; attempt < LoopbackPort.Attempts; attempt++)
        {
            Port = LoopbackPort.Free();
            int exit;
            (exit, output) = StartServer();
            if (exit == 0)
            {
                Running = true;
                return;
            }
            // Another process took the port between the probe and the bind: try another; anything else is a failure.
            if (!Log.Contains("could not bind", StringComparison.Ordinal)) break;
            await Task.Yield();
        }
        throw new InvalidOperationException($"the PostgreSQL test server did not start: {output}\n{Log}");
    }

    (int Exit, string Output) StartServer()
    {
        // fsync off: a throwaway cluster loses nothing of value in a crash, and tests then do not wait for the disk.
        var options = $"-c listen_addresses=127.0.0.1 -p {Port} -k {SocketFolder} -c fsync=off -c full_page_writes=off";
        return TryRunAsPostgres("pg_ctl", ["-D", _data, "-l", LogPath, "-w", "-t", ((int)ServerWait.TotalSeconds).ToString(), "-o", options, "start"]);
    }

    public async Task DisposeAsync()
    {
        if (_data.Length > 0 && Directory.Exists(_data))
            TryRunAsPostgres("pg_ctl", ["-D", _data, "-w", "-t", ((int)ServerWait.TotalSeconds).ToString(), "stop", "-m", "immediate"]);
        Running = false;
        await Task.Yield();
        if (_folder.Length > 0)
        {
            try
            {
                Directory.Delete(_folder, recursive: true);
            }
            catch (IOException)
            {
                // a straggling file; the folder is under the system temp folder
            }
        }
    }

    /// <summary>
    /// The server binaries: <c>pg_config --bindir</c> when it names a folder with initdb (it belongs to the same
    /// major version as libpq-dev), else the newest of Debian's /usr/lib/postgresql/&lt;version&gt;/bin.
    /// </summary>
    public static string FindBinaries()
    {
        var candidates = new List<string>();
        try
        {
            var (exit, output) = Execute("pg_config", ["--bindir"]);
            if (exit == 0) candidates.Add(output.Trim());
        }
        catch (System.ComponentModel.Win32Exception)
        {
            // no pg_config on PATH
        }
        if (Directory.Exists("/usr/lib/postgresql"))
            candidates.AddRange(Directory.GetDirectories("/usr/lib/postgresql")
                .OrderByDescending(d => int.TryParse(Path.GetFileName(d), out var v) ? v : 0)
                .Select(d => Path.Combine(d, "bin")));
        foreach (var dir in candidates)
            if (File.Exists(Path.Combine(dir, "initdb")) && File.Exists(Path.Combine(dir, "pg_ctl")))
                return dir;
        throw new InvalidOperationException(
            $"PostgreSQL's server binaries (initdb, pg_ctl) were not found in pg_config --bindir or /usr/lib/postgresql/*/bin. {InstallHint}");
    }

    void RunAsPostgres(string tool, string[] args)
    {
        var (exit, output) = TryRunAsPostgres(tool, args);
        if (exit != 0) throw new InvalidOperationException($"{tool} {string.Join(' ', args)} failed ({exit}): {output}");
    }

    (int Exit, string Output) TryRunAsPostgres(string tool, string[] args) =>
        Execute("runuser", ["-u", "postgres", "--", Path.Combine(_bin, tool), .. args]);

    static void Run(string exe, string[] args)
    {
        var (exit, output) = Execute(exe, args);
        if (exit != 0) throw new InvalidOperationException($"{exe} {string.Join(' ', args)} failed ({exit}): {output}");
    }

    static (int Exit, string Output) Execute(string exe, string[] args)
    {
        var info = new ProcessStartInfo(exe) { RedirectStandardOutput = true, RedirectStandardError = true, UseShellExecute = false };
        foreach (var a in args) info.ArgumentList.Add(a);
        using var process = Process.Start(info)!;
        // pg_ctl -l sends the server's output to its log, so these pipes close when pg_ctl exits.
        var stdout = process.StandardOutput.ReadToEndAsync();
        var stderr = process.StandardError.ReadToEndAsync();
        if (!process.WaitForExit(ServerWait + TimeSpan.FromSeconds(10)))
        {
            process.Kill(entireProcessTree: true);
            throw new TimeoutException($"{exe} {string.Join(' ', args)} did not finish");
        }
        return (process.ExitCode, stdout.Result + stderr.Result);
    }
}

/// <summary>The tests that share one cluster run one class at a time (a class may stop and start its server).</summary>
[CollectionDefinition(Name)]
public sealed class PostgresCollection : ICollectionFixture<PostgresCluster>
{
    public const string Name = "postgres";
}
