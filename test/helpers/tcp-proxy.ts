import net from 'node:net';

/**
 * A TCP relay between the service and PostgreSQL that a test can cut and restore: cut() drops
 * every open connection and refuses new ones (as a stopped or unreachable server would), restore()
 * lets connections through again. It stands in for restarting the shared server, which other tests
 * use at the same time.
 */
export class TcpProxy {
  private readonly open = new Set<net.Socket>();
  private cutOff = false;
  private constructor(
    private readonly server: net.Server,
    readonly port: number,
  ) {}

  static async start(targetHost: string, targetPort: number): Promise<TcpProxy> {
    let proxy: TcpProxy | null = null;
    const server = net.createServer((client) => {
      if (!proxy || proxy.cutOff) {
        client.destroy();
        return;
      }
      const upstream = net.connect(targetPort, targetHost);
      const pair = [client, upstream];
      for (const s of pair) {
        proxy.open.add(s);
        s.on('error', () => undefined);
        s.on('close', () => {
          proxy?.open.delete(s);
          for (const other of pair) other.destroy();
        });
      }
      client.pipe(upstream);
      upstream.pipe(client);
    });
    await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
    proxy = new TcpProxy(server, (server.address() as net.AddressInfo).port);
    return proxy;
  }

  /** The connection string with host and port replaced by the proxy's. */
  static through(url: string, port: number): string {
    const u = new URL(url);
    u.hostname = '127.0.0.1';
    u.port = String(port);
    return u.toString();
  }

  cut(): void {
    this.cutOff = true;
    for (const s of this.open) s.destroy();
    this.open.clear();
  }

  restore(): void {
    this.cutOff = false;
  }

  get connections(): number {
    return this.open.size;
  }

  async close(): Promise<void> {
    this.cut();
    await new Promise<void>((resolve) => this.server.close(() => resolve()));
  }
}
