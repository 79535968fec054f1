#!/usr/bin/env node
import { hideBin } from 'yargs/helpers';
import { main } from './cli.js';

process.exitCode = await main(hideBin(process.argv));
