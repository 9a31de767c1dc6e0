/**
 * The demo collaboration. EVERYTHING HERE IS INVENTED DEMO DATA: the teams, people and
 * telescope names are fictional; the sites are plausible observatory latitudes and longitudes
 * chosen so that the network spans several continents and both hemispheres.
 */
import type { Role } from '../src/lib/server/platform/db/schema';
import type { ChannelChoices } from '../src/lib/page-channels';

export interface DemoTeam {
	key: string;
	name: string;
	region: string;
	description: string;
}

export interface DemoTelescope {
	team: string;
	name: string;
	siteName: string;
	latitudeDeg: number;
	longitudeDeg: number;
	elevationM: number;
	apertureM: number;
	fovShape: 'circle' | 'rectangle';
	fovWidthDeg: number;
	fovHeightDeg: number;
	filters: string[];
	limitingMag: number;
	limitingMagExposureS: number;
	minAltitudeDeg: number;
	maxAirmass: number;
	minSunSeparationDeg: number;
	minMoonSeparationDeg: number;
	slewOverheadS: number;
	robotic: boolean;
}

export interface DemoPerson {
	email: string;
	name: string;
	password: string;
	roles: Role[];
	teams: string[];
	/**
	 * A phone for pages, seeded as verified, and how each kind of page reaches the person. The
	 * numbers are in the 555-0100 to 555-0199 range that North American numbering keeps for
	 * fiction; the demo's texts and calls go to the app's local fake messaging service.
	 */
	phone?: { number: string; channels: ChannelChoices };
}

export const DEMO_TEAMS: DemoTeam[] = [
	{ key: 'altiplano', name: 'Altiplano Nightwatch', region: 'South America', description: 'Two small telescopes on a high desert ridge (demo).' },
	{ key: 'karoo', name: 'Karoo Wide Field', region: 'Southern Africa', description: 'A wide-field Schmidt survey camera (demo).' },
	{ key: 'canaria', name: 'Canaria Deep', region: 'Europe / Atlantic', description: 'A 2-metre class telescope for deep, narrow imaging (demo).' },
	{ key: 'sonora', name: 'Sonora Robotic', region: 'North America', description: 'A robotic telescope that reports its own pointings (demo).' },
	{ key: 'warrumbungle', name: 'Warrumbungle Watch', region: 'Australia', description: 'A mid-size telescope under southern skies (demo).' },
	{ key: 'himalaya', name: 'High Himalaya Array', region: 'Asia', description: 'A high-altitude infrared-capable telescope (demo).' }
];

const base = { minAltitudeDeg: 25, maxAirmass: 2.4, minSunSeparationDeg: 45, minMoonSeparationDeg: 20, slewOverheadS: 60, robotic: false };

export const DEMO_TELESCOPES: DemoTelescope[] = [
	{ ...base, team: 'altiplano', name: 'Pardo 0.6 m', siteName: 'Cerro Pardo (demo)', latitudeDeg: -30.17, longitudeDeg: -70.8, elevationM: 2400, apertureM: 0.6, fovShape: 'rectangle', fovWidthDeg: 0.4, fovHeightDeg: 0.4, filters: ['g', 'r', 'i'], limitingMag: 20.5, limitingMagExposureS: 300 },
	{ ...base, team: 'altiplano', name: 'Pardo Wide 0.3 m', siteName: 'Cerro Pardo (demo)', latitudeDeg: -30.17, longitudeDeg: -70.8, elevationM: 2400, apertureM: 0.3, fovShape: 'rectangle', fovWidthDeg: 2.2, fovHeightDeg: 2.2, filters: ['r'], limitingMag: 18.8, limitingMagExposureS: 120 },
	{ ...base, team: 'karoo', name: 'Karoo Schmidt 1.0 m', siteName: 'Karoo plateau (demo)', latitudeDeg: -32.38, longitudeDeg: 20.81, elevationM: 1800, apertureM: 1.0, fovShape: 'rectangle', fovWidthDeg: 3.0, fovHeightDeg: 3.0, filters: ['g', 'r'], limitingMag: 20.8, limitingMagExposureS: 90 },
	{ ...base, team: 'canaria', name: 'Tenaz 2.0 m', siteName: 'Roque Alto (demo)', latitudeDeg: 28.76, longitudeDeg: -17.88, elevationM: 2350, apertureM: 2.0, fovShape: 'rectangle', fovWidthDeg: 0.15, fovHeightDeg: 0.15, filters: ['g', 'r', 'i', 'z'], limitingMag: 22.5, limitingMagExposureS: 300, minAltitudeDeg: 30, maxAirmass: 2.0 },
	{ ...base, team: 'sonora', name: 'Saguaro 0.8 m', siteName: 'Sonoran ridge (demo)', latitudeDeg: 31.96, longitudeDeg: -111.6, elevationM: 2100, apertureM: 0.8, fovShape: 'circle', fovWidthDeg: 0.7, fovHeightDeg: 0.7, filters: ['r', 'i'], limitingMag: 21.0, limitingMagExposureS: 180, robotic: true },
	{ ...base, team: 'warrumbungle', name: 'Coonabar 1.3 m', siteName: 'Warrumbungle range (demo)', latitudeDeg: -31.27, longitudeDeg: 149.06, elevationM: 1165, apertureM: 1.3, fovShape: 'rectangle', fovWidthDeg: 0.5, fovHeightDeg: 0.5, filters: ['g', 'r', 'i'], limitingMag: 21.6, limitingMagExposureS: 300 },
	{ ...base, team: 'himalaya', name: 'Changthang 2.0 m', siteName: 'Changthang plateau (demo)', latitudeDeg: 32.78, longitudeDeg: 78.96, elevationM: 4500, apertureM: 2.0, fovShape: 'circle', fovWidthDeg: 0.25, fovHeightDeg: 0.25, filters: ['r', 'i', 'J', 'H'], limitingMag: 21.8, limitingMagExposureS: 600 }
];

/**
 * One person per role (and two more observers for a second and third team, and a second
 * spectroscopist for a second opinion). The two on the duty roster (the duty scientist, and the
 * coordinator as back-up) have phones, so the demo's pages go by text and voice as well as e-mail.
 */
export const DEMO_PEOPLE: DemoPerson[] = [
	{ email: 'admin@strainline.demo', name: 'Ada Ferreira-Lind', password: 'admin-demo-pass', roles: ['admin'], teams: [] },
	{
		email: 'coordinator@strainline.demo',
		name: 'Tomás Okafor-Reyes',
		password: 'coordinator-demo-pass',
		roles: ['coordinator'],
		teams: [],
		phone: { number: '+1 202 555 0178', channels: { 'duty.page': ['email', 'sms'], 'duty.stand-down': ['email', 'sms'] } }
	},
	{
		email: 'duty@strainline.demo',
		name: 'Mirela Sandvik',
		password: 'duty-demo-pass',
		roles: ['duty'],
		teams: [],
		phone: { number: '+1 202 555 0143', channels: { 'duty.page': ['email', 'sms', 'voice'], 'duty.stand-down': ['email', 'sms'] } }
	},
	{ email: 'observer@strainline.demo', name: 'Kenji Ballard', password: 'observer-demo-pass', roles: ['observer'], teams: ['altiplano'] },
	{ email: 'observer2@strainline.demo', name: 'Lerato Voss', password: 'observer2-demo-pass', roles: ['observer'], teams: ['karoo'] },
	{ email: 'observer3@strainline.demo', name: 'Ines Halloran', password: 'observer3-demo-pass', roles: ['observer'], teams: ['canaria', 'sonora'] },
	{ email: 'spectro@strainline.demo', name: 'Priya Marchetti', password: 'spectro-demo-pass', roles: ['spectroscopist'], teams: [] },
	{ email: 'spectro2@strainline.demo', name: 'Anouk Tembo', password: 'spectro2-demo-pass', roles: ['spectroscopist'], teams: [] },
	{ email: 'viewer@strainline.demo', name: 'Jonah Whitcombe', password: 'viewer-demo-pass', roles: ['viewer'], teams: [] }
];
