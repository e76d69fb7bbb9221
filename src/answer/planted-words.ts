// The word lists the planted-instruction detector (planted.ts) reads: who text may address, what
// overriding and steering sound like, in the languages the detector covers. Written from general
// knowledge of these languages, folded to plain lower-case letters as foldText() does.

const set = (s: string): ReadonlySet<string> => new Set(s.split(/\s+/).filter(Boolean));

// --- Lexicons (written from general knowledge; see the file comment) ---------------------------

// Nouns that on their own name an automated reader. Italian "ai" (to the) collides with "AI";
// the roles below (notice to, vocative, subject of must) keep ordinary Italian text unflagged.
export const READER_STRONG = set(`
  ai ia ki llm llms gpt gpts chatbot chatbots bot bots crawler crawlers scraper scrapers
  sprachmodell sprachmodelle sprachmodellen taalmodel taalmodellen`);

// Two-word names of an automated reader.
export const READER_PHRASES: readonly (readonly [string, string])[] = [
  ['language', 'model'], ['language', 'models'], ['artificial', 'intelligence'],
  ['intelligence', 'artificielle'], ['kunstliche', 'intelligenz'], ['inteligencia', 'artificial'],
  ['intelligenza', 'artificiale'], ['kunstmatige', 'intelligentie'], ['modele', 'langage'], ['modeles', 'langage'],
  ['modelo', 'lenguaje'], ['modelos', 'lenguaje'], ['modello', 'linguistico'], ['modelli', 'linguistici'],
  ['modelo', 'linguagem'], ['modelos', 'linguagem'],
];

// Adjectives that make a reader noun automated ("automated answering tools", "assistant virtuel").
export const AUTOMATED = set(`
  automated automatic autonomous virtual digital robotic generative conversational ai ia ki
  automatise automatisee automatises automatisees automatique automatiques virtuel virtuelle virtuels virtuelles
  conversationnel conversationnelle generatif generative generatifs
  automatisiert automatisierte automatisierten automatisierter automatisch automatische automatischen virtuell virtuelle virtuellen digitale digitalen
  automatizado automatizada automatizados automatizadas automatico automatica automaticos automaticas virtuales conversacional conversacionales generativa generativo
  automatizzato automatizzata automatizzati automatizzate automatici automatiche virtuale virtuali conversazionale generativi
  virtuais conversacionais
  geautomatiseerd geautomatiseerde automatisch automatische virtuele digitale generatieve`);

// Nouns that name a reader once an automated adjective is beside them, or when used as a vocative.
export const READER_WEAK = set(`
  assistant assistants agent agents system systems reader readers tool tools model models program programs
  programme programmes software helper helpers responder responders robot robots
  assistante assistantes lecteur lecteurs outil outils systeme systemes modele modeles logiciel logiciels
  assistent assistenten systeme leser werkzeug werkzeuge modell modelle programm programme
  asistente asistentes sistema sistemas agente agentes lector lectores herramienta herramientas modelo modelos programa programas
  assistente assistenti sistemi lettore lettori strumento strumenti modello modelli programma programmi
  leitor leitores ferramenta ferramentas
  systeem systemen lezer lezers model modellen`);

// Words that head a note aimed at someone ("Note for ...", "Important update to ...").
export const NOTICE = set(`
  note notes notice notices message messages update updates instruction instructions reminder attention warning
  announcement memo information info alert nb ps
  avis remarque rappel avertissement consigne consignes jour
  hinweis hinweise mitteilung nachricht notiz achtung anweisung anweisungen
  nota aviso mensaje instruccion instrucciones atencion
  avviso messaggio istruzione istruzioni attenzione
  mensagem instrucao instrucoes atencao
  bericht opmerking mededeling notitie instructie instructies waarschuwing`);

// Prepositions that name a recipient.
export const RECIPIENT = set(`to for attention attn a aux au pour an fur para al per agli alle voor aan aos`);

// Determiners and quantifiers that may stand between a recipient preposition and the reader.
export const DETERMINER = set(`
  the all any every each a an les le la l tous toutes tout chaque des du de d un une
  die der den dem das alle jede jeden jeder jedes ein eine einen einem
  el los las todos todas cualquier cada
  il lo gli i tutti tutte ogni qualsiasi qualunque
  o os as todo qualquer
  het elke ieder iedere een`);

// Greetings that open a vocative ("Hey assistant, ...").
export const GREETING = set(`hey hi hello dear attention ok okay bonjour cher chere salut liebe lieber hallo hola querido querida estimado estimada ciao caro cara gentile ola prezado prezada beste hoi`);

// Verbs that drop what the reader was given (imperatives, infinitives and common finite forms).
export const OVERRIDE_VERB = set(`
  ignore ignores ignoring disregard disregards forget override overrule bypass discard dismiss neglect
  ignorez ignorer oublie oubliez oublier negligez neglige ecartez ecarte outrepassez contournez
  ignoriere ignorieren ignoriert vergiss vergessen vergesst missachte missachten verwirf verwerfe
  ignora ignorad ignorar ignoren olvida olvide olvidad olvidar olviden descarta descarte omite omita desestima
  ignori ignorate ignorare dimentica dimentichi dimenticate dimenticare trascura tralascia scarta
  ignorem esqueca esquece esquecer esquecam desconsidere desconsidera descarte despreze
  negeer negeren vergeet omzeil`);

// What an override verb aims at when it addresses the reader's own instructions.
export const OVERRIDE_RULES = set(`
  instruction instructions prompt prompts directive directives guideline guidelines rule rules command commands
  programming training context constraints guardrails
  consigne consignes regle regles commandes contexte ordres
  anweisung anweisungen anleitung anleitungen instruktion instruktionen regel regeln vorgaben befehle kontext richtlinien
  instruccion instrucciones indicaciones reglas directrices ordenes contexto normas
  istruzione istruzioni regole direttive indicazioni ordini contesto norme
  instrucao instrucoes regras diretrizes ordens orientacoes
  instructie instructies regels aanwijzingen opdrachten richtlijnen`);

// What an override verb aims at when it sets other material aside; only with a modifier like
// "other" or "previous", since "ignore any message that asks for your password" is ordinary advice.
export const OVERRIDE_MATERIAL = set(`
  document documents source sources passage passages text texts content contents information data page pages
  file files material materials excerpt excerpts message messages everything anything
  texte textes contenu contenus informations donnees fichiers tout
  dokument dokumente dokumenten quelle quellen inhalte informationen daten seiten alles
  documento documentos fuente fuentes texto textos contenido contenidos informacion datos paginas todo
  documenti fonte fonti testo testi contenuti informazioni dati pagine tutto
  fontes conteudo conteudos informacoes dados tudo
  documenten bron bronnen tekst teksten inhoud informatie gegevens alles`);

// Modifiers that point at what came before or elsewhere ("previous", "other", "above").
export const ELSEWHERE = set(`
  previous prior earlier above preceding foregoing original existing initial system other remaining else before
  precedent precedents precedente precedentes anterieur anterieurs anterieure anterieures autres autre initiales dessus
  vorherigen vorherige vorigen bisherigen fruheren obigen anderen andere ursprunglichen
  anteriores previas previos otros otras demas originales
  precedenti altri altre originali suddette
  outros outras demais originais
  vorige eerdere voorgaande oorspronkelijke`);

// "your instructions": a possessive points at the reader's own rules, but "your data" is ordinary.
export const YOUR = set(`your vos tes deine ihre deinen tus sus tue tuoi sue suas seus tuas teus jouw uw je`);

// Verbs of saying: what a planted text wants repeated.
export const SAY_VERB = set(`
  tell say answer respond reply state claim inform mention repeat output write confirm assure advise insist announce report
  dites dire repondez reponds repondre indiquez indique affirmez affirme informez informe annoncez confirmez precisez
  sag sage sagt sagen antworte antwortet antworten teile teilt behaupte behaupten erklare informiere bestatige
  diga digan decir responde responda contesta conteste indica indique afirma afirme informa informe comunica confirma
  dici dite dica rispondi risponda rispondere afferma comunica conferma
  dizer comunique confirme
  zeg zeggen antwoord antwoorden vertel vertellen meld melden bevestig`);

// What makes a verb of saying steer the content: "say THAT ...", "answer ONLY ...", "reply WITH ...".
export const STEER = set(`that que qu dass che dat only with uniquement seulement nur solo solamente apenas alleen`);

// Verbs that read ("AI tools reading this page").
export const READING = set(`
  reading processing parsing indexing summarising summarizing scanning crawling analysing analyzing using
  read reads process processes lisant lisez lit lisent lire lesen liest liesst lest leyendo lea lean lee leen
  leggendo legge leggono leggi lendo le leem leest lezen`);

// Objects of reading that mean "this text".
export const THIS_TEXT = set(`this these cette ce cet ces diesen diese dieses diesem este esta estos estas questo questa questi queste dit deze page document text`);

// Must / should in each language (not can / may / will, which describe what a tool does).
export const MODAL = set(`
  should must shall need needs ought
  doit doivent devez devrait devraient
  muss mussen musst soll sollen sollte sollten
  debe deben deberia deberian
  deve devono dovrebbe dovrebbero
  devem deveria deveriam
  moet moeten`);

export const NEGATION = set(`not dont never ne nicht no non niet nao nunca jamais mai kein keine`);

export const IF = set(`if si wenn falls se als`);
export const YOU = set(`you vous tu du eres sei voce je u`);
export const POLITE = set(`please kindly now simply just immediately also bitte svp favor favore alstublieft`);

// Phrases over the folded sentence that on their own ask to override the reader.
export const OVERRIDE_PHRASES: readonly RegExp[] = [
  /\bsystem\s?prompt\b|\bprompt\s+systeme\b/,
  /\byou\s+are\s+now\s+(?:a|an|the|my)\b|\b(?:tu\s+es|vous\s+etes)\s+(?:desormais|maintenant)\b|\bdu\s+bist\s+(?:jetzt|nun)\b|\bahora\s+eres\b|\bora\s+sei\b|\bagora\s+(?:voce\s+e|es)\b|\bje\s+bent\s+nu\b/,
  /\bpretend\s+(?:to\s+be|that|you)\b/,
  /\b(?:respond|reply|answer|output|repondez|reponds|antworte|responde|responda|rispondi|risponda|antwoord)\s+(?:only|uniquement|seulement|nur|solo|solamente|apenas|alleen)\b/,
  // "from now on" and its equivalents, followed by you-must-say or a verb of saying.
  /\b(?:from\s+now\s+on|henceforth|from\s+this\s+point\s+on|desormais|a\s+partir\s+de\s+maintenant|ab\s+jetzt|von\s+nun\s+an|ab\s+sofort|a\s+partir\s+de\s+ahora|de\s+ahora\s+en\s+adelante|d\s*ora\s+in\s+(?:poi|avanti)|da\s+ora\s+in\s+poi|a\s+partir\s+de\s+agora|de\s+agora\s+em\s+diante|vanaf\s+nu|voortaan)\b[\s,:]*(?:you\s+(?:must|should|will|are\s+to)\s+|vous\s+devez\s+|du\s+musst\s+|debes\s+|devi\s+|voce\s+deve\s+|je\s+moet\s+|always\s+|only\s+)?(?:tell|say|answer|respond|reply|state|claim|dites|repondez|sag|sage|antworte|di|diga|responde|rispondi|dici|responda|zeg|antwoord)\b/,
  /\byou\s+(?:must|should|will|shall)\s+(?:now|instead)\s+(?:tell|say|answer|respond|reply|state|claim)\b/,
];

// --- Features ------------------------------------------------------------------------------


// Verbs that would show the planted text to the person asking, and "this" in each language.
export const HIDE = set(`mention reveal disclose repeat quote cite show mentionnez mentionne revelez citez erwahne erwahnen verrate menciones mencione menzionare menzioni rivelare revele vermeld noem onthul`);
export const DEMONSTRATIVE = set(`this these cette ce cet ces diese diesen dieses diesem esta este estos estas questa questo questi queste dit deze`);
// Reader nouns that, bare and singular at the head of a sentence, can only be a vocative to a
// machine ("Assistant, ..."): plural "Agents:" may well be staff being addressed.
export const SINGULAR_VOCATIVE = set(`assistant agent system model bot robot assistente asistente assistent modele modelo modello systeme sistema systeem`);
export const COPULA = set(`are re etes es bist sind eres sei e bent is`);
