import { isLoopbackHost, webhookUrlProblem } from './webhook-url';

describe('webhook addresses', () => {
  it('accepts https anywhere and http on this machine only', () => {
    expect(webhookUrlProblem('https://hooks.example.org/whitecap')).toBeNull();
    expect(webhookUrlProblem('  https://10.0.0.5:8443/in ')).toBeNull();
    expect(webhookUrlProblem('http://127.0.0.1:9000/hook')).toBeNull();
    expect(webhookUrlProblem('http://127.10.0.1/hook')).toBeNull();
    expect(webhookUrlProblem('http://[::1]:9000/hook')).toBeNull();
    expect(webhookUrlProblem('http://localhost:9000/hook')).toBeNull();
  });

  it('refuses plain http to another machine and says why', () => {
    expect(webhookUrlProblem('http://hooks.example.org/whitecap')).toMatch(/^Use https:\/\/\. Plain http:\/\/ is accepted only for a receiver on this machine/);
    expect(webhookUrlProblem('http://10.0.0.5/hook')).toMatch(/^Use https/);
    expect(webhookUrlProblem('http://127.0.0.1.example.org/hook')).toMatch(/^Use https/);
  });

  it('refuses what is not a web address, or carries credentials', () => {
    expect(webhookUrlProblem('')).toMatch(/Enter the address/);
    expect(webhookUrlProblem('hooks.example.org/whitecap')).toMatch(/not a complete address/);
    expect(webhookUrlProblem('ftp://hooks.example.org/')).toMatch(/Only https/);
    expect(webhookUrlProblem('https://user:pw@hooks.example.org/')).toMatch(/Leave user names and passwords out/);
  });

  it('knows the loopback host names', () => {
    expect(isLoopbackHost('127.0.0.1')).toBe(true);
    expect(isLoopbackHost('[::1]')).toBe(true);
    expect(isLoopbackHost('LOCALHOST')).toBe(true);
    expect(isLoopbackHost('128.0.0.1')).toBe(false);
    expect(isLoopbackHost('localhost.example.org')).toBe(false);
  });
});
