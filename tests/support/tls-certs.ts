/** Test certificates made with the machine's openssl: a demo CA, a server certificate for 127.0.0.1, device certificates and a CRL. */
import { spawnSync } from 'node:child_process';
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';

export const hasOpenssl = spawnSync('openssl', ['version']).error === undefined;

export interface DemoPki {
  caPem: string;
  serverCertPem: string;
  serverKeyPem: string;
  device(id: string): { certPem: string; keyPem: string };
  /** A CRL listing the revoked device certificates. */
  crlPem: string;
  remove(): void;
}

function run(dir: string, args: string[]): void {
  const r = spawnSync('openssl', args, { cwd: dir });
  if (r.status !== 0) throw new Error(`openssl ${args.join(' ')} failed: ${r.stderr.toString()}`);
}

// Minimal CA settings for `openssl ca`: an index of issued certificates is what lets it write a CRL.
const CA_CONFIG = `[ ca ]
default_ca = demo
[ demo ]
dir = .
database = index.txt
new_certs_dir = .
serial = serial
crlnumber = crlnumber
default_md = sha256
default_days = 2
default_crl_days = 2
policy = any
[ any ]
commonName = supplied
`;

/** P-256 keys, two-day validity: made fresh for each test file, never kept. */
export function makeDemoPki(deviceIds: string[], revokedIds: string[] = []): DemoPki {
  const dir = mkdtempSync(join(tmpdir(), 'ocellus-pki-'));
  writeFileSync(join(dir, 'ca.cnf'), CA_CONFIG);
  writeFileSync(join(dir, 'index.txt'), '');
  writeFileSync(join(dir, 'serial'), '1000\n');
  writeFileSync(join(dir, 'crlnumber'), '1000\n');
  const ec = ['-newkey', 'ec', '-pkeyopt', 'ec_paramgen_curve:P-256', '-nodes'];
  run(dir, ['req', '-x509', ...ec, '-keyout', 'ca.key', '-out', 'ca.pem', '-days', '2', '-subj', '/CN=ocellus-demo-ca']);
  run(dir, ['req', '-x509', ...ec, '-keyout', 'server.key', '-out', 'server.pem', '-days', '2', '-subj', '/CN=127.0.0.1',
    '-CA', 'ca.pem', '-CAkey', 'ca.key', '-addext', 'subjectAltName=IP:127.0.0.1']);
  const ca = ['-config', 'ca.cnf', '-keyfile', 'ca.key', '-cert', 'ca.pem'];
  for (const id of deviceIds) {
    run(dir, ['req', ...ec, '-keyout', `${id}.key`, '-out', `${id}.csr`, '-subj', `/CN=${id}`]);
    run(dir, ['ca', '-batch', ...ca, '-in', `${id}.csr`, '-out', `${id}.pem`]);
  }
  for (const id of revokedIds) run(dir, ['ca', ...ca, '-revoke', `${id}.pem`]);
  run(dir, ['ca', ...ca, '-gencrl', '-out', 'crl.pem']);
  const read = (name: string) => readFileSync(join(dir, name), 'utf8');
  return {
    caPem: read('ca.pem'),
    serverCertPem: read('server.pem'),
    serverKeyPem: read('server.key'),
    device: (id) => ({ certPem: read(`${id}.pem`), keyPem: read(`${id}.key`) }),
    crlPem: read('crl.pem'),
    remove: () => rmSync(dir, { recursive: true, force: true }),
  };
}
