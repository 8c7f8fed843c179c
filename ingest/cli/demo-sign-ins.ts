// Prints the demo sign-ins (for npm start's banner).
import { demoUsers } from '../src/demo/saltmarsh';

for (const u of demoUsers) console.log(`    ${u.role.padEnd(10)} ${u.email.padEnd(30)} ${u.password}`);
